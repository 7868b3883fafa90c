#!/usr/bin/env python3
"""Write the small invented Chinese sample corpus: sample_corpus/zh_teagarden.txt.gz.

The scenario is made up for the demo: the daily notes of an imaginary tea
co-operative in the hills (weather, picking, withering and roasting, visitors,
the village shop). Sentences are drawn from templates below with a fixed seed,
so the file is the same on every run (gzip with mtime 0). It is for the worked
example `sample_corpus/zh-demo.toml` only: its figures show how maskprep works
on text without spaces, not how real Chinese behaves.

    python scripts/make_zh_sample.py
"""

from __future__ import annotations

import gzip
import random
from pathlib import Path

OUT = Path(__file__).resolve().parent.parent / "sample_corpus" / "zh_teagarden.txt.gz"
SEED = 20261203
LINES = 1600

PEOPLE = ["林阿婆", "陈师傅", "小周", "老吴", "何姐", "阿明", "苏老师", "罗大叔"]
PLACES = ["东坡茶园", "后山老枞", "溪边苗圃", "村口烘房", "合作社仓库", "半山凉亭"]
TEAS = ["高山乌龙", "明前绿茶", "老枞水仙", "野生红茶", "桂花乌龙"]
WEATHER = ["晴", "多云", "小雨", "阵雨", "大雾", "阴"]
TASKS = ["采摘春茶", "晒青", "摇青", "杀青", "揉捻", "烘焙", "拣梗", "装罐"]
VISITORS = ["县里的技术员", "城里来的茶商", "邻村的合作社", "一群大学生", "镇上的邮递员"]
ITEMS = ["竹筛", "焙笼", "温度计", "茶箱", "雨衣", "新剪刀"]
TEMPLATES = [
    "今天{w}，{p}带着两个人在{pl}{t}，一共收了{n}斤鲜叶。",
    "{p}说{tea}今年的香气比去年更足，回甘也快。",
    "上午{w}，下午转{w2}，{t}只好推迟到明天。",
    "{v}来参观{pl}，尝了{tea}，订了{n}箱。",
    "{p}在{pl}检查了焙笼，温度保持在{c}度左右。",
    "合作社仓库新到了{n}个{i}，由{p}负责登记。",
    "晚上开会，大家商量{tea}的价格，{p}建议每斤再涨{c}元。",
    "{pl}的茶树长势很好，{p}说再过{c}天就可以{t}。",
    "因为{w}，{pl}的路很滑，{p}提醒大家穿好雨衣。",
    "{p}教{v}怎样{t}，手法要轻，火候要稳。",
    "这批{tea}已经{t}完毕，明天送到村口烘房。",
    "{p}记录：{pl}今天{t}{n}斤，损耗不到{c}斤。",
]


def line(rng: random.Random) -> str:
    t = rng.choice(TEMPLATES)
    w = rng.choice(WEATHER)
    return t.format(
        p=rng.choice(PEOPLE),
        pl=rng.choice(PLACES),
        tea=rng.choice(TEAS),
        w=w,
        w2=rng.choice([x for x in WEATHER if x != w]),
        t=rng.choice(TASKS),
        v=rng.choice(VISITORS),
        i=rng.choice(ITEMS),
        n=rng.randint(3, 120),
        c=rng.randint(2, 30),
    )


def main() -> None:
    rng = random.Random(SEED)
    docs = []
    for day in range(LINES // 4):
        sentences = [line(rng) for _ in range(rng.randint(2, 6))]
        docs.append(f"第{day + 1}天：" + "".join(sentences))
    data = ("\n".join(docs) + "\n").encode("utf-8")
    OUT.write_bytes(gzip.compress(data, mtime=0))
    print(f"wrote {OUT} ({len(docs)} documents, {len(data):,} bytes before compression)")


if __name__ == "__main__":
    main()
