#!/usr/bin/env node
/**
 * Writes the demo corpus: invented reviews, support tickets and catalogue descriptions of an
 * invented outdoor shop ("Bramblewick Outfitters"), as gzip JSON Lines under data/demo/.
 * Every shop, product line, model, person and address in here is invented.
 *
 *   node scripts/make-demo-corpus.mjs [--out data/demo] [--seed 42] [--docs 10000] [--force]
 *
 * The same seed and document count give byte-identical files. The run is skipped when the output
 * folder already holds the files of the same seed and count (checked through `.generated.json`).
 * Only node: builtins are used, so it runs before `npm run build`.
 */
import { createHash } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, renameSync, rmSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { fileURLToPath, pathToFileURL } from 'node:url';
import { parseArgs } from 'node:util';
import { gzipSync } from 'node:zlib';
import { mulberry32 } from './random.mjs';

export const GENERATOR = 'kindred-demo-corpus';
export const DEFAULT_SEED = 42;
export const DEFAULT_DOCS = 10000;
export const DEFAULT_OUT = 'data/demo';
export const STAMP_NAME = '.generated.json';
const RECORDS_PER_FILE = 2000;
const MIN_TOKENS = 30;
const MAX_TOKENS = 300;
const SHOP = 'Bramblewick Outfitters';

// ---------------------------------------------------------------------------------------------
// Seeded PRNG: mulberry32 (a small 32-bit generator, common practice, no source); one stream per
// run, consumed in a fixed order, so output depends only on (seed, docs).

class Random {
  constructor(seed) {
    this.next = mulberry32(seed);
    /** Cumulative Zipf weights per word list, built once per list. */
    this.zipfCache = new Map();
  }
  int(n) {
    return Math.floor(this.next() * n);
  }
  chance(p) {
    return this.next() < p;
  }
  uniform(list) {
    return list[this.int(list.length)];
  }
  /** Zipf-like pick: the word at rank r (0-based) has weight 1/(r+1), as in Zipf (1949). */
  zipf(list) {
    let cum = this.zipfCache.get(list);
    if (cum === undefined) {
      cum = new Float64Array(list.length);
      let total = 0;
      for (let r = 0; r < list.length; r++) {
        total += 1 / (r + 1);
        cum[r] = total;
      }
      this.zipfCache.set(list, cum);
    }
    const u = this.next() * cum[cum.length - 1];
    let lo = 0;
    let hi = cum.length - 1;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (cum[mid] > u) hi = mid;
      else lo = mid + 1;
    }
    return list[lo];
  }
  /** Standard normal draw by the Box–Muller transform (Box and Muller, 1958). */
  normal() {
    const u1 = 1 - this.next();
    const u2 = this.next();
    return Math.sqrt(-2 * Math.log(u1)) * Math.cos(2 * Math.PI * u2);
  }
}

// ---------------------------------------------------------------------------------------------
// Vocabulary shared by all topics. Each list is ordered by intended frequency (Zipf rank).
// Paradigmatic classes (colours, materials, sizes, terrain, days, months) fill the same slots, so
// their members share contexts.

const SHARED = {
  C: ['green', 'blue', 'red', 'grey', 'black', 'orange', 'yellow', 'olive', 'navy', 'purple', 'teal', 'white'],
  S: ['medium', 'large', 'small', 'regular', 'long', 'wide'],
  T: ['ridge', 'coast', 'valley', 'forest', 'moor', 'lake', 'meadow', 'canyon', 'island', 'glacier'],
  TRIP: ['weekend', 'trip', 'holiday', 'hike', 'expedition', 'tour', 'journey'],
  WX: ['rain', 'wind', 'snow', 'frost', 'sleet', 'hail', 'fog', 'heat'],
  NUM: ['two', 'three', 'four', 'five', 'six', 'ten', 'eight', 'twelve'],
  PER: ['week', 'day', 'month', 'fortnight', 'season'],
  PERS: ['weeks', 'days', 'months', 'seasons', 'fortnights'],
  REL: ['partner', 'friend', 'daughter', 'son', 'sister', 'brother', 'neighbour', 'colleague'],
  POS: ['great', 'excellent', 'superb', 'brilliant', 'solid', 'fantastic', 'lovely', 'outstanding'],
  NEG: ['poor', 'disappointing', 'flimsy', 'terrible', 'shoddy', 'awful', 'mediocre', 'cheap'],
  HAPPY: ['happy', 'pleased', 'delighted', 'satisfied', 'thrilled'],
  UNHAPPY: ['unhappy', 'annoyed', 'frustrated', 'disappointed', 'upset'],
  DAY: ['Monday', 'Tuesday', 'Wednesday', 'Thursday', 'Friday', 'Saturday', 'Sunday'],
  MONTH: ['January', 'February', 'March', 'April', 'May', 'June', 'July', 'August', 'September',
    'October', 'November', 'December'],
};

/** Invented customer first names (made up from syllables; not meant to name anyone). */
const CUSTOMERS = ['Alvenna', 'Brenlow', 'Caspira', 'Dellwyn', 'Emberlin', 'Fennick', 'Garrowen', 'Halcyra',
  'Ilmarra', 'Jorvelle', 'Kestrin', 'Lunavel', 'Morwessa', 'Nimbrel', 'Orlavane', 'Pellamy', 'Quillaro',
  'Rosvane', 'Silvarra', 'Tamsorel', 'Ulvanna', 'Veyrin', 'Wenloria', 'Yarrowin', 'Zellandra', 'Abrisca',
  'Borrivan', 'Corlette', 'Dunmira', 'Elvasto', 'Fiorwen', 'Grendalie', 'Hollivane', 'Isbrandel', 'Jessamor',
  'Kailora', 'Lorvick', 'Mirrasol', 'Nettlebee', 'Osmarra'];
/** Invented support staff of the invented shop. */
const STAFF = [['Maris', 'Quillfeather'], ['Tobin', 'Brackwhistle'], ['Ysella', 'Mossgarden'],
  ['Corvin', 'Tumblethorn'], ['Perrin', 'Larkspindle']];
const MODEL_HEADS = ['Tarn', 'Wren', 'Moss', 'Fern', 'Thistle', 'Cinder', 'Larch', 'Bracken', 'Heather',
  'Quartz', 'Gorse', 'Sorrel'];
const MODEL_TAILS = ['crest', 'fold', 'back', 'hollow', 'stead', 'burrow', 'gate', 'spire', 'wick', 'mere'];

// ---------------------------------------------------------------------------------------------
// Product topics. N: names of the product (near-synonyms), P: parts, A: topical adjectives,
// VN/VNP: verbs taking the product (base/past), F/FP: failure verbs (base/past), X: situations,
// M: materials (drawn from one shared class), USE: activities. Extra slots are topic-only.

const PRODUCT_TOPICS = [
  {
    line: 'shelters', code: 'SHL',
    N: ['tent', 'shelter', 'tarp', 'bivy', 'canopy', 'dome'],
    P: ['pole', 'peg', 'guyline', 'vestibule', 'groundsheet', 'flysheet', 'door', 'inner', 'seam'],
    A: ['roomy', 'sturdy', 'spacious', 'windproof', 'stable', 'freestanding', 'taut', 'airy'],
    VN: ['pitch', 'stake', 'erect', 'fold', 'anchor'],
    VNP: ['pitched', 'staked', 'erected', 'folded', 'anchored'],
    F: ['leak', 'sag', 'tear', 'snap', 'flap'],
    FP: ['leaked', 'sagged', 'tore', 'snapped', 'flapped'],
    X: ['condensation', 'storm', 'gust', 'campsite', 'dew', 'puddle'],
    M: ['nylon', 'polyester', 'canvas', 'silicone'],
    USE: ['camping', 'backpacking', 'bikepacking', 'touring', 'festivals'],
    templates: [
      'The {N} kept {NUM} of us dry through a night of {WX} and {X}.',
      'There was some {X} inside the {N} but the {P} handled the {WX} well.',
      'Room for {NUM} sleepers and all our kit under the {P} of the {N}.',
      'Once the {P} is tensioned the {N} stands {A} even when the {X} picks up.',
    ],
  },
  {
    line: 'stoves', code: 'STV',
    N: ['stove', 'burner', 'cooker', 'hob'],
    P: ['canister', 'valve', 'igniter', 'windscreen', 'pot', 'pan', 'jet', 'regulator', 'lid'],
    A: ['efficient', 'compact', 'powerful', 'quick', 'frugal', 'steady'],
    VN: ['light', 'ignite', 'assemble', 'prime', 'refuel'],
    VNP: ['lit', 'ignited', 'assembled', 'primed', 'refuelled'],
    F: ['clog', 'sputter', 'flare', 'stall', 'hiss'],
    FP: ['clogged', 'sputtered', 'flared', 'stalled', 'hissed'],
    X: ['flame', 'altitude', 'soot', 'fumes', 'simmer', 'heat'],
    M: ['titanium', 'aluminium', 'steel', 'brass'],
    USE: ['cooking', 'brewing', 'baking', 'camping'],
    FOOD: ['water', 'porridge', 'pasta', 'coffee', 'soup', 'rice', 'noodles', 'stew', 'tea'],
    MEAL: ['breakfast', 'supper', 'dinner', 'lunch'],
    FUEL: ['gas', 'butane', 'propane', 'paraffin'],
    templates: [
      'The {N} boiled a litre of {FOOD} in {NUM} minutes.',
      'We cooked {FOOD} and {FOOD} on the {N} every {MEAL}.',
      'The {P} gives a {A} flame even in {WX}.',
      'One canister of {FUEL} lasted {NUM} {PERS} of {MEAL} and {FOOD}.',
      'The {N} can {VN} on the first click and hold a gentle {X} for {FOOD}.',
    ],
  },
  {
    line: 'footwear', code: 'FTW',
    N: ['boot', 'shoe', 'trainer', 'sandal', 'slipper'],
    P: ['sole', 'lace', 'insole', 'heel', 'toe', 'tread', 'ankle', 'tongue', 'eyelet', 'midsole'],
    A: ['comfortable', 'grippy', 'supportive', 'snug', 'cushioned', 'lightweight', 'waterproof'],
    VN: ['lace', 'wear', 'resole', 'polish', 'dubbin'],
    VNP: ['laced', 'wore', 'resoled', 'polished', 'dubbined'],
    F: ['split', 'squeak', 'rub', 'crack', 'peel'],
    FP: ['split', 'squeaked', 'rubbed', 'cracked', 'peeled'],
    X: ['mud', 'scree', 'bog', 'gravel', 'pavement', 'heather'],
    M: ['leather', 'suede', 'rubber', 'mesh', 'wool'],
    USE: ['hiking', 'walking', 'trekking', 'scrambling', 'running'],
    SHOESIZE: ['42', '41', '43', '40', '44', '39', '45', '38', '46'],
    templates: [
      'I take a size {SHOESIZE} and the {N} fits true to size.',
      'Walked {NUM} miles through {X} and {X} without a single blister.',
      'The {P} grips well on wet {X} and the {P} stays {A}.',
      'My feet stayed dry in the {N} even after a day in the {X}.',
    ],
  },
  {
    line: 'rainwear', code: 'RNW',
    N: ['jacket', 'shell', 'parka', 'anorak', 'poncho', 'cagoule'],
    P: ['hood', 'cuff', 'zip', 'pocket', 'membrane', 'seam', 'hem', 'drawcord', 'collar', 'vent'],
    A: ['breathable', 'waterproof', 'packable', 'windproof', 'stretchy', 'quiet'],
    VN: ['wear', 'stow', 'reproof', 'wash', 'layer'],
    VNP: ['wore', 'stowed', 'reproofed', 'washed', 'layered'],
    F: ['leak', 'delaminate', 'fray', 'rip', 'stick'],
    FP: ['leaked', 'delaminated', 'frayed', 'ripped', 'stuck'],
    X: ['downpour', 'drizzle', 'shower', 'squall', 'deluge', 'cloudburst'],
    M: ['nylon', 'polyester', 'cotton'],
    USE: ['commuting', 'hiking', 'cycling', 'walking', 'fishing'],
    templates: [
      'Stayed dry in a {X} that lasted {NUM} hours.',
      'The {P} keeps the {WX} out and the {P} lets sweat escape.',
      'It stows into its own {P} and weighs almost nothing.',
      'Even in a {X} the {N} stayed {A} and I never felt clammy.',
    ],
  },
  {
    line: 'sleep', code: 'SLP',
    N: ['bag', 'quilt', 'liner', 'cocoon', 'duvet'],
    P: ['baffle', 'footbox', 'hood', 'zip', 'collar', 'stuffsack', 'seam'],
    A: ['warm', 'cosy', 'lofty', 'compressible', 'plush', 'snug'],
    VN: ['stuff', 'unzip', 'compress', 'air', 'fluff'],
    VNP: ['stuffed', 'unzipped', 'compressed', 'aired', 'fluffed'],
    F: ['clump', 'snag', 'flatten', 'tear', 'shed'],
    FP: ['clumped', 'snagged', 'flattened', 'tore', 'shed'],
    X: ['frost', 'chill', 'draught', 'dampness', 'cold'],
    M: ['down', 'polyester', 'silk', 'fleece', 'cotton'],
    USE: ['camping', 'backpacking', 'mountaineering', 'bivouacs'],
    templates: [
      'Warm enough at minus {NUM} degrees, even with {X} on the {P}.',
      'The {P} traps heat and the {M} fill lofts quickly.',
      'I slept {NUM} nights in the {N} and woke up {A} every time.',
      'No {X} got past the {P} of the {N} all night.',
    ],
  },
  {
    line: 'packs', code: 'PCK',
    N: ['backpack', 'rucksack', 'pack', 'daypack', 'haversack'],
    P: ['strap', 'hipbelt', 'frame', 'buckle', 'compartment', 'lid', 'pocket', 'harness', 'loop'],
    A: ['capacious', 'adjustable', 'ventilated', 'roomy', 'padded', 'sturdy'],
    VN: ['carry', 'load', 'adjust', 'shoulder', 'haul'],
    VNP: ['carried', 'loaded', 'adjusted', 'shouldered', 'hauled'],
    F: ['chafe', 'rip', 'snap', 'sag', 'fray'],
    FP: ['chafed', 'ripped', 'snapped', 'sagged', 'frayed'],
    X: ['kit', 'gear', 'food', 'supplies', 'luggage', 'ropes'],
    M: ['nylon', 'polyester', 'canvas', 'aluminium'],
    USE: ['hiking', 'commuting', 'trekking', 'climbing', 'travelling'],
    templates: [
      'It carries {NUM} kilos of {X} without strain on the {P}.',
      'The {P} moves the load to my hips and the {P} stays put.',
      'Plenty of room for {X} and {X} in the main {P}.',
      'After a long day with the {N} my shoulders felt fine.',
    ],
  },
  {
    line: 'lighting', code: 'LGT',
    N: ['lamp', 'lantern', 'headlamp', 'torch', 'flashlight', 'headtorch'],
    P: ['battery', 'beam', 'bulb', 'switch', 'charger', 'lens', 'reflector', 'cell', 'port'],
    A: ['bright', 'dimmable', 'rechargeable', 'focused', 'steady', 'vivid'],
    VN: ['recharge', 'switch', 'dim', 'mount', 'clip'],
    VNP: ['recharged', 'switched', 'dimmed', 'mounted', 'clipped'],
    F: ['flicker', 'die', 'fade', 'overheat', 'fail'],
    FP: ['flickered', 'died', 'faded', 'overheated', 'failed'],
    X: ['dusk', 'dawn', 'midnight', 'twilight', 'darkness'],
    M: ['aluminium', 'plastic', 'silicone', 'steel'],
    USE: ['running', 'reading', 'caving', 'camping', 'fishing'],
    templates: [
      'The {N} throws a {A} beam for {NUM} hours on full power.',
      'I use the {N} for {USE} at {X} and it never lets me down.',
      'The {P} lasts {NUM} hours and recharges over USB.',
      'At {X} the {A} {P} lit the whole path.',
    ],
  },
  {
    line: 'water', code: 'WTR',
    N: ['filter', 'purifier', 'straw', 'sterilizer', 'pump'],
    P: ['cartridge', 'membrane', 'hose', 'nozzle', 'cap', 'bladder', 'prefilter', 'housing'],
    A: ['clean', 'safe', 'portable', 'fresh', 'clear', 'pure'],
    VN: ['squeeze', 'backflush', 'rinse', 'fill', 'attach'],
    VNP: ['squeezed', 'backflushed', 'rinsed', 'filled', 'attached'],
    F: ['clog', 'drip', 'crack', 'jam', 'slow'],
    FP: ['clogged', 'dripped', 'cracked', 'jammed', 'slowed'],
    X: ['stream', 'river', 'spring', 'pond', 'brook', 'tarn'],
    M: ['plastic', 'silicone', 'steel', 'titanium'],
    USE: ['hiking', 'backpacking', 'travelling', 'emergencies', 'paddling'],
    CONTAM: ['bacteria', 'sediment', 'grit', 'silt', 'protozoa'],
    templates: [
      'We drank straight from the {X} after running it through the {N}.',
      'The {P} removes {CONTAM} and {CONTAM} and leaves no taste.',
      'The {N} filters {NUM} litres in a few minutes.',
      'Even murky {X} water came out {A} through the {N}.',
    ],
  },
];

/** Review sentences for any product topic, by mood. */
const REVIEW_POSITIVE = [
  'I bought the {C} {N} for a {TRIP} on the {T} and it was {POS}.',
  'The {N} is {A} and {A}, exactly what I wanted.',
  'It was easy to {VN} the {N} even in the {WX}.',
  'I {VNP} the {N} in {NUM} minutes on my first try.',
  'The {P} feels {POS} and the {P} is {A}.',
  'After {NUM} {PERS} of {USE} the {P} still looks new.',
  'My {REL} {NAME} borrowed the {N} for a {TRIP} and now wants one too.',
  'We took the {MODEL} {N} to the {T} in heavy {WX} and it stayed {A}.',
  'The {M} {P} is {POS} quality for the price.',
  'I chose the {S} size in {C} and the fit is {POS}.',
  'Compared with my old {N2}, this {N} is far more {A}.',
  '{POS} {N}, {A} and well made.',
  'Would recommend the {MODEL} to anyone who enjoys {USE}.',
  'Overall I am {HAPPY} with the {N} and the {C} looks {POS}.',
  'The {C} {N} stood out against the {T} in every photo.',
];
const REVIEW_NEGATIVE = [
  'The {P} started to {F} after {NUM} {PERS}.',
  'On the second {TRIP} the {P} {FP} and the {N} was useless.',
  'The {N} looked {A} in the photos but the {P} is {NEG}.',
  'The {M} feels {NEG} and the {P} {FP} during {USE}.',
  'I expected a {A} {N} but got a {NEG} one with a loose {P}.',
  'My {REL} {NAME} says the {P} on their {N} {FP} too.',
  'In {WX} on the {T} the {N} {FP} and we had to turn back.',
  'For a {N} at this price the {P} should not {F} so quickly.',
  'Not {A} at all, the {P} {FP} within a {PER}.',
  'Overall I am {UNHAPPY} with the {MODEL} {N}.',
  'The {C} dye ran and the {P} looks {NEG} already.',
];
const REVIEW_NEUTRAL = [
  'The {N} is fine but the {P} could be more {A}.',
  'Decent {N} for {USE}, though the {P} is a little {NEG}.',
  'It comes in {C}, {C} and {C}, and I picked {C}.',
  'The {S} size fits well but the {M} is thinner than expected.',
  'It does the job on the {T} but I would not take it out in {WX}.',
  'Good value, although my old {N2} was more {A}.',
];
/** Reviews sometimes mention the delivery. */
const REVIEW_DELIVERY = [
  'The {SN} arrived {SA} on {DAY} and the box was intact.',
  'The {SX} left the {SN} with my {REL} on {DAY}.',
];
const REVIEW_SIGNOFF = ['Thanks {SHOP}!', '{NAME}, {T} walker.', 'Five stars from {NAME}.', '{NAME}'];

/** Service topics for support tickets. SN/SX/SA/SV: nouns, situations, adjectives, past verbs. */
const SERVICE_TOPICS = [
  {
    topic: 'shipping', weight: 0.4,
    SN: ['parcel', 'package', 'delivery', 'shipment', 'consignment', 'box'],
    SX: ['courier', 'driver', 'depot', 'warehouse', 'doorstep', 'neighbour', 'postcode', 'porch', 'van'],
    SA: ['late', 'delayed', 'prompt', 'slow', 'missing', 'early'],
    SV: ['shipped', 'dispatched', 'posted', 'sent', 'delivered'],
    customer: [
      'My {SN} was {SV} on {DAY} but has still not arrived.',
      'The tracking says the {SN} has been at the {SX} since {DAY}.',
      'The {SX} left the {SN} by the {SX} instead of at my door.',
      'The {SN} arrived {SA} and the {PN} inside was fine.',
      'Can you tell me when the {SN} will be {SV}?',
      'The {SN} came {SA} and the {SX} would not give me a time.',
      'I was home all {DAY} and nobody came with the {SN}.',
      'The {SN} for my {C} {PN} is {SA} again.',
    ],
    staff: [
      'I have asked the {SX} to check and your {SN} should be {SV} by {DAY}.',
      'Sorry the {SN} was {SA}; the {SX} had a backlog on {DAY}.',
      'Your {SN} left our {SX} on {DAY} and is with the {SX} now.',
    ],
  },
  {
    topic: 'returns', weight: 0.35,
    SN: ['refund', 'exchange', 'replacement', 'return', 'credit', 'reimbursement'],
    SX: ['label', 'receipt', 'form', 'policy', 'deadline', 'reason', 'portal', 'condition'],
    SA: ['faulty', 'damaged', 'defective', 'unused', 'unworn', 'wrong'],
    SV: ['processed', 'approved', 'requested', 'issued', 'arranged'],
    customer: [
      'The {PN} I received is {SA} and I would like a {SN}.',
      'I sent the {PN} back on {DAY} but the {SN} has not been {SV} yet.',
      'Where do I find the {SX} for my {SN}?',
      'I would prefer a {SN} rather than a {SN}.',
      'The {SX} says a {SN} is possible within {NUM} {PERS}.',
      'The {C} {PN} is {SA}, so please send a {SN} or a {SN}.',
      'I printed the {SX} for the {SN} but the {SX} will not load.',
      'The {SN} I was promised on {DAY} has not been {SV}.',
    ],
    staff: [
      'I have {SV} your {SN}; please allow {NUM} {PERS} for it to show.',
      'Because the {PN} is {SA} the {SN} is {SV} without a {SX}.',
      'I have attached a new {SX} so you can send the {PN} back for a {SN}.',
    ],
  },
  {
    topic: 'payment', weight: 0.25,
    SN: ['payment', 'charge', 'transaction', 'invoice', 'fee', 'bill'],
    SX: ['card', 'voucher', 'discount', 'statement', 'account', 'checkout', 'bank', 'basket'],
    SA: ['duplicate', 'pending', 'incorrect', 'unexpected', 'double', 'declined'],
    SV: ['charged', 'billed', 'debited', 'deducted', 'invoiced'],
    customer: [
      'I was {SV} twice for the same order on my {MONTH} statement.',
      'The {SN} is still {SA} on my {SX}.',
      'My {SX} was {SA} at the {SX} although it is valid.',
      'The {SN} on my {SX} does not match the {SN} on the {SX}.',
      'The {SX} code from {MONTH} did not apply to my {SN}.',
      'I see an {SA} {SN} from {MONTH} for a {PN} I never ordered.',
      'Please explain the {SA} {SN} I was {SV} on {DAY}.',
    ],
    staff: [
      'I can see the {SA} {SN} and have asked our {SX} team to reverse it.',
      'The {SN} was {SV} once; the second line is a {SA} hold that drops off by {DAY}.',
      'I have added a {SX} to your {SX} for the trouble.',
    ],
  },
];
const TICKET_OPEN = [
  'Hello, my name is {NAME} and I am writing about order {ORDER}.',
  'Hi, {NAME} here about order {ORDER}.',
  'Dear {SHOP}, this is {NAME} with a question on order {ORDER}.',
];
const TICKET_CONTACT = ['You can reach me at {EMAIL}.', 'Please reply to {EMAIL}.'];
const TICKET_PRODUCT = [
  'It is the {C} {MODEL} {PN} in size {S}.',
  'The {PN} itself is {POS} but I need this sorted before my {TRIP}.',
  'I ordered the {MODEL} {PN} for a {TRIP} on the {T}.',
];
const TICKET_CUSTOMER_CLOSE = ['Thanks, {NAME}.', 'Regards, {NAME}.', 'I am {UNHAPPY} about this, {NAME}.'];
const STAFF_OPEN = [
  'Thanks {NAME}, this is {STAFF} from the {SHOP} support team.',
  '{STAFF_FIRST} here from {SHOP} customer care, thanks for writing, {NAME}.',
];
const STAFF_CLOSE = ['Kind regards, {STAFF}.', 'Best wishes, {STAFF_FIRST}.', 'Thanks for your patience, {STAFF_FIRST} at {SHOP}.'];

const CATALOGUE_OPEN = [
  'The {MODEL} {N} from {SHOP} is a {A} {N} made of {M}.',
  'Meet the {MODEL}, a {A} and {A} {N} in {M}.',
];
const CATALOGUE_BODY = [
  'Available in {C}, {C} and {C}.',
  'Sizes {S}, {S} and {S}.',
  'Ideal for {USE} on the {T} or the {T}.',
  'Each {N} comes with a spare {P} and a {M} {P}.',
  'The {P} is {A} and the {P} is reinforced with {M}.',
  'Built for {WX} and {WX}, tested on the {T}.',
  'A {A} {N} for {USE} and {USE}.',
];

// ---------------------------------------------------------------------------------------------
// Generation

function buildProducts(rng) {
  const products = [];
  for (const topic of PRODUCT_TOPICS) {
    const used = new Set();
    for (let i = 1; i <= 24; i++) {
      let name;
      do {
        name = rng.uniform(MODEL_HEADS) + rng.uniform(MODEL_TAILS);
      } while (used.has(name));
      used.add(name);
      products.push({ topic, sku: `BW-${topic.code}-${String(i).padStart(4, '0')}`, name });
    }
  }
  return products;
}

/** Fills one template; `ctx` supplies the document's fixed slots, lists come from topic or shared vocabulary. */
function render(template, rng, ctx) {
  // Words already placed in this sentence; a repeated slot draws again so "red, red and blue" is rare.
  const placed = new Set();
  const out = template.replace(/\{([A-Z0-9_]+)\}/g, (_, slot) => {
    if (slot in ctx.fixed) return ctx.fixed[slot];
    const list = slot === 'N2' || slot === 'PN' ? ctx.product.topic.N
      : (ctx.service && ctx.service[slot]) ?? ctx.topic[slot] ?? SHARED[slot];
    if (list === undefined) throw new Error(`demo corpus template slot {${slot}} has no word list`);
    let word = rng.zipf(list);
    for (let tries = 0; placed.has(word) && tries < 8; tries++) word = rng.zipf(list);
    placed.add(word);
    return word;
  });
  const fixedArticles = out.replace(/\b([Aa]) (?=[aeiouAEIOU])/g, '$1n ');
  return fixedArticles.charAt(0).toUpperCase() + fixedArticles.slice(1);
}

function countTokens(text) {
  let n = 0;
  for (const t of text.split(/\s+/)) if (t.length > 0) n++;
  return n;
}

/** Target length in whitespace tokens: log-normal around `median`, clipped to [30, 300]. */
function targetLength(rng, median) {
  const t = Math.round(median * Math.exp(0.55 * rng.normal()));
  return Math.min(MAX_TOKENS, Math.max(MIN_TOKENS, t));
}

/** Appends sentences from `pick()` until the target is reached, never passing MAX_TOKENS. */
function fill(sentences, tokens, target, pick) {
  let n = tokens;
  for (let guard = 0; n < target && guard < 200; guard++) {
    const s = pick();
    const k = countTokens(s);
    if (n + k > MAX_TOKENS) break;
    sentences.push(s);
    n += k;
  }
  return n;
}

function pickCustomer(rng) {
  return rng.zipf(CUSTOMERS);
}

function makeReview(rng, products, index) {
  const product = rng.uniform(products);
  const rating = [1, 2, 3, 4, 4, 5, 5, 5][rng.int(8)];
  const name = pickCustomer(rng);
  const service = SERVICE_TOPICS[0];
  const ctx = { topic: product.topic, product, service, fixed: { NAME: name, MODEL: product.name, SHOP } };
  const mood = rating >= 4 ? REVIEW_POSITIVE : rating <= 2 ? REVIEW_NEGATIVE : REVIEW_NEUTRAL;
  const target = targetLength(rng, 115);
  const sentences = [];
  let n = 0;
  const pick = () => {
    const u = rng.next();
    if (u < 0.3) return render(rng.uniform(product.topic.templates), rng, ctx);
    if (u < 0.37) return render(rng.uniform(REVIEW_DELIVERY), rng, ctx);
    if (u < 0.5) return render(rng.uniform(REVIEW_NEUTRAL), rng, ctx);
    return render(rng.uniform(mood), rng, ctx);
  };
  n = fill(sentences, n, Math.max(MIN_TOKENS, target - 3), pick);
  if (rng.chance(0.35)) {
    const s = render(rng.uniform(REVIEW_SIGNOFF), rng, ctx);
    if (n + countTokens(s) <= MAX_TOKENS) sentences.push(s);
  }
  return {
    id: `rev-${String(index).padStart(6, '0')}`,
    kind: 'review',
    product: { sku: product.sku, line: product.topic.line, name: product.name },
    body: { text: sentences.join(' ') },
    rating,
  };
}

function pickService(rng) {
  const u = rng.next();
  let acc = 0;
  for (const s of SERVICE_TOPICS) {
    acc += s.weight;
    if (u < acc) return s;
  }
  return SERVICE_TOPICS[SERVICE_TOPICS.length - 1];
}

function makeTicket(rng, products, index) {
  const product = rng.uniform(products);
  const service = pickService(rng);
  const name = pickCustomer(rng);
  const [first, last] = rng.uniform(STAFF);
  const order = `BW-${String(100000 + rng.int(900000))}`;
  const email = `${name.toLowerCase()}${10 + rng.int(90)}@example.invalid`;
  const ctx = {
    topic: product.topic, product, service,
    fixed: { NAME: name, MODEL: product.name, SHOP, ORDER: order, EMAIL: email, STAFF: `${first} ${last}`, STAFF_FIRST: first },
  };
  const target = targetLength(rng, 120);
  const answered = rng.chance(0.7);
  const sentences = [render(rng.uniform(TICKET_OPEN), rng, ctx)];
  let n = countTokens(sentences[0]);
  const customerShare = answered ? Math.round(target * 0.6) : Math.max(MIN_TOKENS, target - 5);
  n = fill(sentences, n, customerShare, () => {
    const u = rng.next();
    if (u < 0.15) return render(rng.uniform(TICKET_PRODUCT), rng, ctx);
    if (u < 0.25) return render(rng.uniform(product.topic.templates), rng, ctx);
    return render(rng.uniform(service.customer), rng, ctx);
  });
  for (const list of [rng.chance(0.2) ? TICKET_CONTACT : null, TICKET_CUSTOMER_CLOSE]) {
    if (list === null) continue;
    const s = render(rng.uniform(list), rng, ctx);
    if (n + countTokens(s) <= MAX_TOKENS) {
      sentences.push(s);
      n += countTokens(s);
    }
  }
  if (answered) {
    const open = render(rng.uniform(STAFF_OPEN), rng, ctx);
    if (n + countTokens(open) <= MAX_TOKENS - 8) {
      sentences.push(open);
      n += countTokens(open);
      n = fill(sentences, n, Math.max(MIN_TOKENS, target - 5), () => render(rng.uniform(service.staff), rng, ctx));
      const close = render(rng.uniform(STAFF_CLOSE), rng, ctx);
      if (n + countTokens(close) <= MAX_TOKENS) sentences.push(close);
    }
  }
  return {
    id: `tkt-${String(index).padStart(6, '0')}`,
    kind: 'ticket',
    product: { sku: product.sku, line: product.topic.line, name: product.name },
    body: { text: sentences.join(' ') },
    topic: service.topic,
    status: answered ? 'answered' : 'open',
  };
}

function makeCatalogue(rng, products, index) {
  const product = products[index % products.length];
  const ctx = { topic: product.topic, product, service: null, fixed: { MODEL: product.name, SHOP } };
  const target = targetLength(rng, 70);
  const sentences = [render(rng.uniform(CATALOGUE_OPEN), rng, ctx)];
  fill(sentences, countTokens(sentences[0]), target, () => {
    const u = rng.next();
    if (u < 0.45) return render(rng.uniform(CATALOGUE_BODY), rng, ctx);
    if (u < 0.75) return render(rng.uniform(product.topic.templates), rng, ctx);
    return render(rng.uniform(REVIEW_POSITIVE.slice(1, 6)), rng, ctx);
  });
  return {
    id: `cat-${String(index).padStart(6, '0')}`,
    kind: 'catalogue',
    product: { sku: product.sku, line: product.topic.line, name: product.name },
    body: { text: sentences.join(' ') },
  };
}

/**
 * Generates the corpus in memory: a list of files, each with its JSON Lines text.
 * @param {{ seed: number, docs: number }} options
 * @returns {{ files: { name: string, records: number, jsonl: string }[], documents: number, tokens: number }}
 */
export function generateDemoCorpus({ seed, docs }) {
  const rng = new Random(seed);
  const products = buildProducts(rng);
  const reviews = Math.round(docs * 0.6);
  const tickets = Math.round(docs * 0.3);
  const catalogue = docs - reviews - tickets;
  const plan = [
    ['reviews', reviews, makeReview],
    ['tickets', tickets, makeTicket],
    ['catalogue', catalogue, makeCatalogue],
  ];
  const files = [];
  let tokens = 0;
  for (const [prefix, count, make] of plan) {
    for (let start = 0, part = 0; start < count; start += RECORDS_PER_FILE, part++) {
      const end = Math.min(count, start + RECORDS_PER_FILE);
      const lines = [];
      for (let i = start; i < end; i++) {
        const record = make(rng, products, i + 1);
        tokens += countTokens(record.body.text);
        lines.push(JSON.stringify(record));
      }
      files.push({ name: `${prefix}-${String(part).padStart(3, '0')}.jsonl.gz`, records: end - start, jsonl: lines.join('\n') + '\n' });
    }
  }
  return { files, documents: docs, tokens };
}

/**
 * Gzip with a fixed level; zlib writes mtime 0 and no file name, and the OS byte (offset 9) is
 * pinned to 255 "unknown" (RFC 1952, section 2.3.1) so the header does not depend on the platform.
 */
export function gzipDeterministic(text) {
  const gz = gzipSync(Buffer.from(text, 'utf8'), { level: 9 });
  gz[9] = 255;
  return gz;
}

function sha256(buf) {
  return createHash('sha256').update(buf).digest('hex');
}

/** Hash of this script's source: any edit to templates or vocabulary makes old stamps stale. */
function generatorSha256() {
  return sha256(readFileSync(fileURLToPath(import.meta.url)));
}

function writeAtomic(dir, name, data) {
  const tmp = path.join(dir, `.${name}.${process.pid}.tmp`);
  writeFileSync(tmp, data);
  renameSync(tmp, path.join(dir, name));
}

function readStamp(dir) {
  try {
    return JSON.parse(readFileSync(path.join(dir, STAMP_NAME), 'utf8'));
  } catch {
    return null;
  }
}

/** True when the stamp matches (generator source, seed, docs) and every listed file is intact. */
function stampIsCurrent(dir, stamp, seed, docs) {
  if (stamp === null || typeof stamp !== 'object') return false;
  if (stamp.generator !== GENERATOR || stamp.generatorSha256 !== generatorSha256()) return false;
  if (stamp.seed !== seed || stamp.docs !== docs || !Array.isArray(stamp.files)) return false;
  for (const f of stamp.files) {
    if (typeof f?.name !== 'string' || path.basename(f.name) !== f.name) return false;
    const p = path.join(dir, f.name);
    if (!existsSync(p)) return false;
    if (sha256(readFileSync(p)) !== f.sha256) return false;
  }
  return true;
}

/**
 * Writes the corpus into `out` unless it already holds the same seed and count (or `force`).
 * @param {{ out: string, seed: number, docs: number, force?: boolean }} options
 * @returns {{ skipped: boolean, out: string, files: string[], documents: number, tokens: number }}
 */
export function writeDemoCorpus({ out, seed, docs, force = false }) {
  const old = readStamp(out);
  if (!force && stampIsCurrent(out, old, seed, docs)) {
    return { skipped: true, out, files: old.files.map((f) => f.name), documents: old.documents, tokens: old.tokens };
  }
  mkdirSync(out, { recursive: true });
  rmSync(path.join(out, STAMP_NAME), { force: true });
  const corpus = generateDemoCorpus({ seed, docs });
  const listed = [];
  for (const f of corpus.files) {
    const gz = gzipDeterministic(f.jsonl);
    writeAtomic(out, f.name, gz);
    listed.push({ name: f.name, records: f.records, bytes: gz.length, sha256: sha256(gz), jsonlSha256: sha256(Buffer.from(f.jsonl, 'utf8')) });
  }
  // Files named by an earlier stamp but not produced now (a larger --docs) would be read as input: remove them.
  const keep = new Set(listed.map((f) => f.name));
  if (old !== null && Array.isArray(old.files)) {
    for (const f of old.files) {
      if (typeof f?.name === 'string' && path.basename(f.name) === f.name && !keep.has(f.name)) {
        rmSync(path.join(out, f.name), { force: true });
      }
    }
  }
  const stamp = { generator: GENERATOR, generatorSha256: generatorSha256(), seed, docs, documents: corpus.documents, tokens: corpus.tokens, files: listed };
  writeAtomic(out, STAMP_NAME, JSON.stringify(stamp, null, 2) + '\n');
  return { skipped: false, out, files: listed.map((f) => f.name), documents: corpus.documents, tokens: corpus.tokens };
}

function parseIntegerOption(name, raw, min, max) {
  if (!/^\d+$/.test(raw)) throw new UsageError(`--${name} must be a whole number, got "${raw}"`);
  const v = Number(raw);
  if (v < min || v > max) throw new UsageError(`--${name} must be between ${min} and ${max}, got ${raw}`);
  return v;
}

class UsageError extends Error {}

const USAGE = 'usage: node scripts/make-demo-corpus.mjs [--out data/demo] [--seed 42] [--docs 10000] [--force]';

export function main(argv) {
  let values;
  try {
    ({ values } = parseArgs({
      args: argv,
      options: {
        out: { type: 'string', default: DEFAULT_OUT },
        seed: { type: 'string', default: String(DEFAULT_SEED) },
        docs: { type: 'string', default: String(DEFAULT_DOCS) },
        force: { type: 'boolean', default: false },
        help: { type: 'boolean', short: 'h', default: false },
      },
      strict: true,
      allowPositionals: false,
    }));
    if (values.help) {
      process.stdout.write(`${USAGE}\nWrites invented reviews, tickets and catalogue text of an invented shop as gzip JSON Lines.\n`);
      return 0;
    }
    const seed = parseIntegerOption('seed', values.seed, 0, 4294967295);
    const docs = parseIntegerOption('docs', values.docs, 1, 10000000);
    const r = writeDemoCorpus({ out: values.out, seed, docs, force: values.force });
    const summary = `${values.out} (${r.files.length} files, ${r.documents} documents, ${r.tokens} tokens, seed ${seed})`;
    process.stdout.write(r.skipped ? `demo corpus present: ${summary}; use --force to regenerate\n` : `demo corpus written: ${summary}\n`);
    return 0;
  } catch (e) {
    if (e instanceof UsageError || e?.code?.startsWith?.('ERR_PARSE_ARGS')) {
      process.stderr.write(`make-demo-corpus: ${e.message}\n${USAGE}\n`);
      return 2;
    }
    if (e?.code === 'ENOSPC' || e?.code === 'EACCES' || e?.code === 'EROFS') {
      process.stderr.write(`make-demo-corpus: cannot write to ${values?.out}: ${e.code}; free space or choose another --out\n`);
      return 1;
    }
    throw e;
  }
}

if (process.argv[1] !== undefined && pathToFileURL(path.resolve(process.argv[1])).href === import.meta.url) {
  process.exitCode = main(process.argv.slice(2));
}
