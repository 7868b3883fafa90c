"""Read shards written by `maskprep.shards.write.write_shards` back as numpy batches or a pyarrow
dataset.

`ShardSet` (made by `maskprep.open_shards`) lists the shard files of a
finished directory from its manifest, iterates them in manifest order as
dicts of numpy arrays (one per record batch or row group: storage order, not
training order), offers `.dataset()` (pyarrow.dataset) and, for ``--dynamic``
shards, `.mask(batch, ...)`: the same sampler as static masking, with the
run's options, so the result equals the static rows of a run with the same
seed when each row is masked with its own copy. For training batches
(batch size, shuffling, ranks, workers, epochs, resuming) use
`maskprep.shards.loader.ShardLoader`.

This module does not write or check shards.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Iterator, Mapping

import numpy as np

from ..errors import MaskprepError
from ..masking.sampler import MaskingConfig, mask_batch
from .layout import ShardManifest, ShardRecord, metadata_path
from .shardfile import COPY_DTYPE

__all__ = ["ShardSet", "to_numpy"]


def to_numpy(part: Any, *, seq_len: int, copy: int) -> dict[str, np.ndarray]:
    """One pyarrow batch/table as numpy: list columns (n, seq_len), others 1-D.

    Files of format version 1 have no ``copy`` column; it is filled with `copy`.

    >>> to_numpy(reader.get_batch(0), seq_len=128, copy=0)["input_ids"].shape  # doctest: +SKIP
    (1024, 128)
    """
    import pyarrow as pa

    out: dict[str, np.ndarray] = {}
    for name in part.schema.names:
        col = part.column(name)
        if isinstance(col, pa.ChunkedArray):
            col = col.combine_chunks()
        if pa.types.is_list(col.type):
            out[name] = col.flatten().to_numpy().reshape(len(col), seq_len)
        else:
            out[name] = col.to_numpy()
    if "copy" not in out:
        out["copy"] = np.full(part.num_rows, copy, dtype=COPY_DTYPE)
    return out


class ShardSet:
    """Shards of one directory, read back as numpy batches or a pyarrow dataset.

    Iterating yields one dict per record batch (Arrow) or row group (Parquet):
    2-D ``input_ids`` / ``labels`` or ``unit_ids`` (int32) and ``attention_mask``
    (int8), 1-D ``sequence_id`` (uint64) and ``copy`` (int16).

    >>> shards = open_shards("shards/")  # doctest: +SKIP
    >>> next(iter(shards))["input_ids"].shape  # doctest: +SKIP
    (1024, 128)
    """

    def __init__(self, directory: str | Path) -> None:
        self.directory = Path(directory)
        self.manifest = ShardManifest.read(self.directory)
        self.options = dict(self.manifest.options)
        self.dynamic = bool(self.options["dynamic"])
        self.files = [self.directory / s.file for s in self.manifest.shards]
        self.legacy_layout = ShardManifest.legacy_layout(self.directory)

    def metadata(self, name: str) -> Path:
        """Path of a metadata file (``stats.json``, ``tokenizer.json``) of this directory."""
        return metadata_path(self.directory, name)

    def __len__(self) -> int:
        return sum(s.rows for s in self.manifest.shards)

    def __repr__(self) -> str:
        kind = "dynamic" if self.dynamic else "static"
        return (f"ShardSet({str(self.directory)!r}: {len(self)} rows in {len(self.files)} "
                f"{self.options.get('format', '?')} files, {kind}, "
                f"strategy {self.options.get('strategy', '?')})")

    def __iter__(self) -> Iterator[dict[str, np.ndarray]]:
        for record in self.manifest.shards:
            yield from self.file_batches(record)

    def parts(self, record: ShardRecord) -> Iterator[Any]:
        """The pyarrow record batches (Arrow) or row-group tables (Parquet) of one shard file."""
        import pyarrow as pa

        path = self.directory / record.file
        if not path.is_file():
            raise MaskprepError(f"{path}: shard listed in the manifest is missing")
        if self.options["format"] == "arrow":
            reader = pa.ipc.open_file(pa.memory_map(str(path)))
            for i in range(reader.num_record_batches):
                yield reader.get_batch(i)
        else:
            import pyarrow.parquet as pq

            pf = pq.ParquetFile(str(path))
            for i in range(pf.num_row_groups):
                yield pf.read_row_group(i)

    def file_batches(self, record: ShardRecord) -> Iterator[dict[str, np.ndarray]]:
        """Batches of one shard file (see the class docs)."""
        for part in self.parts(record):
            yield to_numpy(part, seq_len=int(self.options["seq_len"]), copy=record.copy)

    def dataset(self) -> Any:
        """The shards as a ``pyarrow.dataset.Dataset`` (in manifest order)."""
        import pyarrow.dataset as ds

        return ds.dataset(
            [str(f) for f in self.files],
            format="ipc" if self.options["format"] == "arrow" else "parquet",
        )

    def masking_config(self) -> MaskingConfig:
        o = self.options
        return MaskingConfig(
            strategy=o["strategy"],
            rate=o["rate"],
            mix=tuple(o["mix"]),
            mix_per=o["mix_per"],
            span_p=o["span_p"],
            span_max=o["span_max"],
        )

    def random_token_ids(self) -> np.ndarray:
        """The non-special ids random replacements draw from (as when writing)."""
        tok = self.manifest.tokenizer
        ids = np.arange(int(tok["vocab_size"]), dtype=np.int32)
        return ids[~np.isin(ids, np.asarray(tok["special_ids"], dtype=np.int32))]

    def mask(self, batch: Mapping[str, np.ndarray], *, copy: int | None = None,
             seed: int | None = None, epoch: int | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Mask a batch of dynamic shard rows on the fly: (input_ids, labels).

        By default every row is masked with its own copy number (then the result
        equals the static rows of a run with the same options); ``epoch=e`` masks
        a row of copy c with copy ``c + e x copies`` (epoch 0 = the rows' own
        copies, every later epoch a fresh mask for every row); ``copy=k`` masks
        every row with copy k. Rows of several copies may be mixed in a batch.
        """
        if "unit_ids" not in batch:
            raise MaskprepError(f"{self.directory}: these shards are already masked (static); "
                                "write them with --dynamic to mask on the fly")
        if copy is not None and epoch is not None:
            raise MaskprepError("ShardSet.mask: pass copy= or epoch=, not both")
        if epoch is not None and (
            isinstance(epoch, bool) or not isinstance(epoch, (int, np.integer)) or epoch < 0
        ):
            raise MaskprepError(f"epoch must be a whole number >= 0, got {epoch!r}")
        ids, units, seqs = batch["input_ids"], batch["unit_ids"], batch["sequence_id"]
        kw: dict[str, Any] = {
            "seed": self.options["seed"] if seed is None else seed,
            "config": self.masking_config(),
            "mask_token_id": int(self.manifest.tokenizer["mask_token_id"]),
            "random_token_ids": self.random_token_ids(),
        }
        if copy is not None:
            return mask_batch(ids, units, sequence_ids=seqs, copy=copy, **kw)
        row_copy = np.asarray(batch["copy"], dtype=np.int64)
        offset = 0 if epoch is None else int(epoch) * int(self.options["copies"])
        copies = np.unique(row_copy)
        if len(copies) == 1:
            return mask_batch(ids, units, sequence_ids=seqs, copy=int(copies[0]) + offset, **kw)
        masked = np.empty_like(np.asarray(ids, dtype=np.int32))
        labels = np.empty_like(masked)
        for c in copies.tolist():  # one sampler call per copy present (at most --copies)
            rows = np.flatnonzero(row_copy == c)
            masked[rows], labels[rows] = mask_batch(ids[rows], units[rows], sequence_ids=seqs[rows],
                                                    copy=c + offset, **kw)
        return masked, labels


def open_shards(directory: str | Path) -> ShardSet:
    """Open a finished shards directory: ``for batch in open_shards("shards/"): ...``.

    >>> open_shards("maskprep-demo/mask/pmi").manifest.strategy  # doctest: +SKIP
    'pmi'
    """
    return ShardSet(directory)
