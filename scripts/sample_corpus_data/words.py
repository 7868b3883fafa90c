"""Word lists of the sample corpus: ranked pools, names, and bases for derived forms.

Data only. Each pool is ranked roughly most common first; the rank drives the
Zipf-like weights in `sample_corpus_grammar.Picker`. Noun specs are
``singular[/plural]``; verb specs are ``base[/past[/participle]]`` with a
trailing ``*`` doubling the last consonant (see `sample_corpus_vocab`).
"""
from __future__ import annotations

COUNT_NOUNS = """
day boat island harbour quay crossing passenger week morning year time vehicle
ticket notice meeting member road house tide line month evening night hour
minute crew skipper pier ferry/ferries jetty beach shore bay cove channel rock
reef headland lighthouse beacon light signal flag mast deck hull engine
propeller rudder anchor chain cable net pot cage tank pump pipe valve hose
filter battery generator motor radio/radios phone message call office desk door
window roof wall shed store shop school church hall library museum cafe
kitchen table chair bench box crate bag barrel bucket basket sack pallet
container trolley crane winch hoist ramp gate fence post sign board map chart
compass clock sensor meter reading sample bottle jar tube record log book page
list form permit licence price bill payment account budget grant fund plan
project scheme proposal decision vote question answer problem issue change
delay cancellation repair inspection test check trial visit trip journey
voyage route service sailing departure arrival schedule booking seat cabin
berth bunk galley lounge bridge wheelhouse hatch locker ladder rail step stair
floor corner edge end side top bottom middle centre front back area part piece
section zone site spot place position level depth height length width weight
size number figure total family child/children parent mother father brother
sister friend neighbour visitor tourist guest worker farmer
fisherman/fishermen diver mate pilot officer clerk manager chair secretary
treasurer volunteer student teacher nurse driver cook baker keeper porter
ranger scientist technician mechanic electrician builder carpenter painter
man/men woman/women person/people bird gull tern seal otter whale dolphin
fish/fish crab lobster mussel oyster shell stone pebble storm gale squall
shower cloud sky sun moon star tree bush flower garden field farm sheep/sheep
cow horse dog cat hen egg apple potato/potatoes harvest crop yield batch
season cycle blade stipe float marker sinker block current swell surge
breakwater slip wharf/wharves pontoon dinghy/dinghies launch tender trawler
yacht canoe kayak oar sail keel bow stern lifejacket lifeboat flare torch
lantern helmet glove boot coat hat jacket street village town council parish
letter email poster leaflet newsletter website rule warning alarm siren bell
whistle hand head eye face arm leg foot/feet idea reason result effect cause
example case fact holiday festival party concert dance race regatta show fair
market tug barge coaster hut workshop garage warehouse depot yard lane track
path hill cliff inlet valley stream pool spring well gap ridge slope shelf/shelves
knife/knives hook knot bolt nut screw spanner hammer drill saw brush tin can
lid sheet tarpaulin canvas buckle strap wheel tyre axle trailer tractor van
lorry bus bicycle car shelter cairn wreck hazard obstacle leak crack dent hole
fault breakdown spare label tag key lock hinge handle switch cord plug socket
fuse bulb lamp heater stove kettle mug cup plate bowl spoon fork tray
napkin blanket pillow mattress curtain carpet rug mirror picture photo/photos
camera screen keyboard printer copy file folder envelope stamp parcel package
delivery order invoice receipt voucher pass badge uniform apron mop
broom queue crowd group team band choir club society class lesson
course exam prize award medal cup trophy speech toast dinner lunch breakfast
supper picnic sandwich cake pie biscuit scone
almanac anemometer barnacle bilge binnacle bulkhead capstan cleat coxswain
davit dory fairlead fathom fender forepeak gangway gunwale halyard hawser jib
keelson lanyard limpet outboard pennant porthole rowlock scupper sextant
shackle sheave skiff spar stanchion strake tiller transom whaler bramble
thistle nettle dune croft byre peat dyke ditch drain culvert sluice weir
causeway ford stile kiln forge mill granary barn stable paddock orchard
allotment greenhouse cupboard drawer wardrobe cushion quilt teapot saucepan
ladle sieve grater grocer postman/postmen postmistress/postmistresses shepherd
crofter ferryman/ferrymen deckhand boatbuilder beachcomber chandler cooper
weaver knitter fiddler piper agreement arrangement announcement apology
complaint suggestion reminder explanation permission application registration
renewal extension reduction increase shortage surplus estimate forecast
assessment measurement adjustment replacement improvement development
requirement entitlement contribution subscription donation collection
"""

MASS_NOUNS = """
water weather fog rain wind ice oil fuel diesel gear cargo freight salt sand
mud kelp timber paint concrete silt traffic news information equipment damage
maintenance work food coffee tea bread milk mail electricity power heat noise
smoke steam rust grease money cash rubbish waste plastic steel wood glass
paper wool advice help support funding insurance safety shelter spray foam
sleet snow hail drizzle mist daylight darkness
"""

ADJECTIVES = """
new old good small large big little long short high low early late full
empty open closed busy quiet calm rough wet dry cold warm hot cool fresh clear
dark bright heavy strong weak safe dangerous slow fast quick steady sudden
usual unusual normal regular local northern southern eastern western main
final first last next previous recent annual weekly daily monthly careful
serious minor major simple difficult easy hard soft loose tight broken damaged
clean dirty rusty salty sandy rocky muddy foggy windy stormy sunny cloudy misty
frosty icy grey green blue white black red yellow brown orange silver public
private special general extra additional temporary permanent available
necessary important possible likely certain ready happy glad tired young whole
single double narrow wide deep shallow steep flat smooth sharp thick thin tall
near far upper lower inner electric wooden plastic aluminium iron copper
rubber cotton woollen friendly helpful kind polite grateful proud pleased
worried anxious nervous curious sheltered exposed remote isolated crowded
lonely peaceful noisy excellent poor fine fair reasonable strange odd
different similar modern ancient traditional original official formal
informal brisk fierce gentle mild bitter freezing faulty worn leaking cracked
bent missing blocked flooded sturdy fragile costly cheap expensive generous
patient busy punctual overdue urgent routine brief lengthy steadfast bare
sheer hollow solid slippery tidy untidy shabby neat modest vast tiny huge
brackish briny windswept sodden blustery squally drizzly overcast hazy leaden
glassy choppy turbulent tranquil serene placid mottled speckled weathered
tarred varnished galvanised corroded seaworthy buoyant waterproof watertight
airtight ramshackle derelict disused abandoned unmanned uninhabited navigable
treacherous perilous hazardous cautious diligent meticulous reliable
dependable seasonal coastal offshore inshore nautical maritime marine
"""

ADVERBS = """
again also already always almost away back soon still then there today
tomorrow yesterday here now later quickly slowly carefully finally nearly
rarely often usually sometimes never once twice together instead perhaps
probably certainly clearly simply only just even quite very rather fairly
mostly mainly largely partly briefly suddenly gradually steadily safely
easily properly badly well ahead aboard ashore overnight afterwards
"""

# base[/past[/participle]]; a trailing * doubles the last consonant.
TRANSITIVE_VERBS = """
check inspect repair replace clean paint move carry lift lower open close
start stop* fix test measure record report collect deliver send/sent
receive order book cancel delay confirm announce approve reject discuss review
publish post print sign complete finish prepare plan* build/built install
remove mark count weigh pack unload haul harvest tow pull push secure tie
untie lash pump take/took/taken bring/brought find/found see/saw/seen
give/gave/given hold/held keep/kept leave/left make/made put/put show/showed/shown
tell/told buy/bought sell/sold lose/lost meet/met write/wrote/written read/read
catch/caught lend/lent spend/spent hear/heard know/knew/known throw/threw/thrown
cut/cut shut/shut drive/drove/driven break/broke/broken need want use try
visit thank welcome invite ask help join follow watch notice spot* chart
sample store fill empty drain seal raise adjust tighten loosen grease
oil scrub sweep/swept wash dry stack sort label* hire fund share offer
organise arrange attend host support expect explain describe mention remind
warn advise inform contact phone email agree settle pay/paid charge refund
caulk splice coil stow dredge scour salvage refloat ballast varnish tar*
galvanise lubricate calibrate monitor dismantle reassemble overhaul replenish
restock ration allocate distribute catalogue tabulate compile
"""

INTRANSITIVE_VERBS = """
arrive depart sail return wait stay remain go/went/gone come/came/come
run/ran/run rise/rose/risen fall/fell/fallen blow/blew/blown freeze/froze/frozen
sink/sank/sunk swim/swam/swum fly/flew/flown grow/grew/grown happen occur
continue begin/began/begun end improve worsen ease turn shift* settle clear
calm gather pass land dock anchor float work rest sleep/slept walk travel*
reopen close open pause resume ring/rang/rung shine/shone/shone
"""

FIRST_NAMES = """
Alys Bran Cadan Dilys Fenna Gethin Hesper Idris Jory Kerra Lowri Morwen Nessa
Owain Pryce Rhian Sennen Tegan Ulla Wenna Aled Beca Cai Derwa Eira Frey Gwen
Hal Ianto Jenna Kit Lorcan Meg Nye Olwen Piran Rosen Siôn Talan Vida Wyn Zoë
Søren Mårta Aurélie Tomás Siân Brónach José Elin Fion Garan Hollis Ives Jago
Keziah Lyle Mabyn Nola Orla Perran Quinn Rue Sidra Teilo
"""

SURNAMES = """
Trelawn Pascoe Hendry Quiller Mardle Nance Rowse Tonkin Jewell Bolitho Carne
Dunstan Eddy Fraddon Gilbert Harvey Ivey Jago Kitto Lander Moyle Nicholls
Opie Polglase Rodda Stevens Tregear Uren Vivian Warne Yelland Angove Bray
Chegwidden Daniel Elliott Furse Grose Hocking Inch James Keast Laity Mitchell
Northey Oates Penrose Retallack Sleeman Thomas Udy Vosper Wearne Curnow
Ellery Faull Gendall Hosking Knuckey Lobb Menhenick Nankivell Pengelly Rablen
Sobey Trezise Varcoe Whetter Ferreira Müller Nuñez
"""

TITLES = "Mr Mrs Ms Skipper Councillor Nurse Chief Mate"

PLACES = """
Tolvan Kellin Harrowby Brisay Skelda Innish Gorran Caddow Yarrel Brennock
Tullagh Orsk Pennance Hallow Skarth Vorran Lisk Ennor Tresk Corrie
Fennick Garth Holm Inver Keld Lunna Marrick Noss Oxna Pabbay Ronan Sanday
Tarrack Uyea Vementry Weisdale Yell Ardnish Balta Colla Durn Eshaness Fara
"""

VESSELS = """
Fulmar Curlew Dunlin Shearwater Guillemot Razorbill Puffin Whimbrel Plover
Sanderling Eider Scoter Merlin Tarrin Blythe Osprey Heron Swift
Redshank Godwit Skua Gannet Cormorant Wren Kestrel
"""

WEEKDAYS = ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday")
MONTHS = ("January", "February", "March", "April", "May", "June", "July",
          "August", "September", "October", "November", "December")
MONTHS_SHORT = tuple(m[:3] for m in MONTHS)


# Derivations that add a realistic tail of rarer word forms (affixes that a
# subword tokenizer learns to split off, as it does on real text).
REDO_VERBS = frozenset(_v for _v in """check inspect repair replace clean paint
    open close start fix test measure record deliver send order book confirm
    publish post print sign build install mark count weigh pack fill seal
    adjust tighten sort label hire organise arrange write sell make""".split())
LY_BASES = tuple("""quick slow careful steady sudden usual unusual normal regular
    final recent serious simple easy safe bright heavy strong weak gentle mild
    fierce bitter brief sharp smooth thick warm cold calm rough quiet noisy
    happy proud polite kind patient generous nervous anxious curious official
    formal informal traditional original dangerous hazardous treacherous
    cautious diligent meticulous reliable seasonal punctual urgent brisk neat
    tidy vast huge deep wide large near fair high clear certain possible
    necessary temporary permanent full loose tight steep shallow""".split())
ER_BASES = tuple("""new old small large big long short high low early late full calm
    rough wet dry cold warm hot cool fresh clear dark bright heavy strong weak
    safe slow fast quick steady busy quiet easy hard soft loose tight clean dirty
    rusty salty sandy rocky muddy foggy windy stormy sunny cloudy misty icy grey
    narrow wide deep shallow steep flat smooth sharp thick thin tall near young
    happy kind mild fierce gentle bitter brisk tidy neat tiny choppy hazy sturdy
    cheap poor fine fair""".split())
NESS_BASES = tuple("""dark calm rough wet dry weak steady soft late slow tight short
    empty fresh bright ready cold loose sharp thick thin smooth kind polite happy
    tired lonely gentle bitter sudden heavy damp weary stiff salty""".split())
NAME_HEADS = ("Tre", "Pol", "Pen", "Car", "Ros", "Lan", "Bos", "Kil", "Ard", "Bal",
              "Dun", "Inver", "Glen", "Strath", "Kin", "Ach", "Tor", "Skel", "Hal",
              "Ben", "Craig", "Mar", "Tal", "Gwen", "Nan", "Por", "Lis", "Tren")
NAME_MIDDLES = ("", "a", "e", "o", "i", "an", "en", "or", "ar", "el", "ow", "in", "um", "ith")
SURNAME_TAILS = ("wick", "nance", "garrow", "dell", "thorpe", "away", "ack", "ock", "ey",
                 "an", "ith", "ard", "en", "ley", "ster", "wen", "gan", "lin", "rick",
                 "mayne", "ford", "bury")
PLACE_TAILS = ("holm", "ness", "by", "wick", "sett", "ay", "avik", "more", "ton",
               "dale", "vaig", "sker", "tun", "ister", "garth", "ick", "ey", "oe")

