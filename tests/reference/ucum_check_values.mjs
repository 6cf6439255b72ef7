// UCUM check values for calcium-cds, produced by the NLM's ucum-lhc library.
//
// For every unit code in the UNITS table of service/src/clinical/units.rs this
// asks @lhncbc/ucum-lhc (npm, exact version pinned in package.json and
// package-lock.json) whether the code is valid UCUM and what 1 of the unit is
// in the base unit of its dimension. Only the codes and their dimension names
// are read from units.rs; our factors are never read, so every factor in the
// output comes from ucum-lhc. It also asks ucum-lhc about the codes we refuse,
// and makes mass <-> substance <-> equivalent conversions with molecular
// weights taken from molar-mass-check-values.json (computed by molmass; so
// regenerate that file first).
//
//   node ucum_check_values.mjs           writes ucum-check-values.json
//   node ucum_check_values.mjs --check   exits 1 if the committed file differs
//                                        (the "generated" date is ignored)

import { readFileSync, writeFileSync, existsSync } from 'node:fs';
import { createRequire } from 'node:module';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { isDeepStrictEqual } from 'node:util';
import ucum from '@lhncbc/ucum-lhc';

const here = dirname(fileURLToPath(import.meta.url));
const require = createRequire(import.meta.url);
const OUTPUT = join(here, 'ucum-check-values.json');
const UNITS_RS = join(here, '..', '..', 'service', 'src', 'clinical', 'units.rs');
const MOLAR = join(here, 'molar-mass-check-values.json');

const LIB = '@lhncbc/ucum-lhc';
const libVersion = require(`${LIB}/package.json`).version;
const utils = ucum.UcumLhcUtils.getInstance();

// The base unit our table uses for each Dimension variant (units.rs docs).
// null: no conversion is asked for ([pH] is a special, non-linear unit).
const BASE = {
  MassConcentration: 'g/L',
  SubstanceConcentration: 'mol/L',
  EquivalentConcentration: 'eq/L',
  CatalyticConcentration: 'U/L',
  Mass: 'kg',
  Length: 'cm',
  Duration: 'ms',
  Weeks: 'wk',
  Ph: null,
  MassRatio: 'g/g',
  SubstanceRatio: 'mol/mol',
};

// Other spellings a sender may use, with the table code each resembles and our
// policy: 'accept' (the same UCUM unit: lower-case litre) or 'refuse'.
const SPELLINGS = [
  ['mg/dl', 'mg/dL', 'accept'],
  ['mmol/l', 'mmol/L', 'accept'],
  ['g/l', 'g/L', 'accept'],
  ['mEq/L', 'meq/L', 'refuse'],
  ['MG/DL', 'mg/dL', 'refuse'],
  ['mg%', 'mg/dL', 'refuse'],
  ['µmol/L', 'umol/L', 'refuse'],
  ['mmol', 'mmol/L', 'refuse'],
];

// Chemistry conversions: [substance key in molar-mass-check-values.json, from, to, charge].
const CHEMISTRY = [
  ['Ca', 'mg/dL', 'mmol/L', null],
  ['Ca', 'mmol/L', 'mg/dL', null],
  ['Ca', 'mg/L', 'mmol/L', null],
  ['Ca', 'mmol/L', 'meq/L', 2],
  ['Ca', 'meq/L', 'mmol/L', 2],
  ['Ca', 'mg/dL', 'meq/L', 2],
  ['Mg', 'mg/dL', 'mmol/L', null],
  ['Mg', 'mmol/L', 'mg/dL', null],
  ['Mg', 'meq/L', 'mmol/L', 2],
  ['P', 'mg/dL', 'mmol/L', null],
  ['P', 'mmol/L', 'mg/dL', null],
  ['creatinine', 'mg/dL', 'umol/L', null],
  ['creatinine', 'mg/dL', 'mmol/L', null],
  ['calcifediol', 'ng/mL', 'nmol/L', null],
  ['calcitriol', 'pg/mL', 'pmol/L', null],
];

function fail(msg) {
  console.error(msg);
  process.exit(1);
}

// Codes and dimension names of UNITS, in table order.
function readUnitTable() {
  const src = readFileSync(UNITS_RS, 'utf8');
  const start = src.indexOf('pub const UNITS');
  if (start < 0) fail(`no 'pub const UNITS' in ${UNITS_RS}`);
  const end = src.indexOf('];', start);
  const block = src.slice(start, end);
  const calls = (block.match(/\bunit\(/g) || []).length;
  const units = [...block.matchAll(/\bunit\(\s*"((?:[^"\\]|\\.)*)"\s*,\s*D::(\w+)\s*,/g)].map((m) => ({
    code: m[1],
    dimension: m[2],
  }));
  if (units.length === 0 || units.length !== calls) {
    fail(`read ${units.length} of ${calls} unit(...) entries from UNITS; update the pattern in this script`);
  }
  for (const u of units) {
    if (!(u.dimension in BASE)) fail(`dimension ${u.dimension} of '${u.code}' has no base unit in this script`);
  }
  return units;
}

function validate(code) {
  const r = utils.validateUnitString(code, false);
  return {
    status: r.status,
    ucum_code: r.ucumCode ?? null,
    name: r.unit ? r.unit.name : null,
    messages: r.msg ?? [],
  };
}

function convert(from, value, to, options = {}) {
  const r = utils.convertUnitTo(from, value, to, options);
  return {
    status: r.status,
    value: r.status === 'succeeded' ? r.toVal : null,
    messages: r.msg ?? [],
  };
}

// 1 of the unit in UCUM base units (m, g, s, mol, ...), e.g. {magnitude: 10, exponents: {m: -3, g: 1}}.
function inBaseUnits(code) {
  const r = utils.convertToBaseUnits(code, 1);
  if (r.status !== 'succeeded') return { status: r.status, messages: r.msg ?? [] };
  return { status: r.status, magnitude: r.magnitude, exponents: r.unitToExp };
}

function compute() {
  const units = readUnitTable().map(({ code, dimension }) => {
    const base = BASE[dimension];
    const entry = { code, dimension, base_unit: base, validation: validate(code) };
    if (base === null) {
      const b = utils.convertToBaseUnits(code, 7);
      entry.special_unit = b.fromUnitIsSpecial ?? null;
      entry.conversion = null;
      entry.factor_to_base = null;
    } else {
      entry.conversion = convert(code, 1, base);
      entry.factor_to_base = entry.conversion.value;
    }
    return entry;
  });

  const baseUnits = {};
  for (const base of Object.values(BASE)) if (base !== null) baseUnits[base] = validate(base);

  const spellings = SPELLINGS.map(([code, resembles, policy]) => ({
    code,
    resembles,
    policy,
    validation: validate(code),
    in_base_units: inBaseUnits(code),
    conversion_of_1_to_resembled: convert(code, 1, resembles),
  }));

  if (!existsSync(MOLAR)) fail(`${MOLAR} is missing: run molar_mass_check_values.py first`);
  const molar = JSON.parse(readFileSync(MOLAR, 'utf8'));
  const chemistry = CHEMISTRY.map(([substance, from, to, charge]) => {
    const s = molar.substances[substance];
    if (!s) fail(`no substance '${substance}' in ${MOLAR}`);
    const options = { molecularWeight: s.molar_mass_g_per_mol };
    if (charge !== null) options.charge = charge;
    return {
      substance,
      formula: s.formula,
      molecular_weight_g_per_mol: s.molar_mass_g_per_mol,
      molecular_weight_from: `${molar.library} ${molar.version}`,
      charge,
      from,
      value: 1,
      to,
      result: convert(from, 1, to, options),
    };
  });

  return {
    library: LIB,
    version: libVersion,
    source: 'npm package @lhncbc/ucum-lhc (U.S. National Library of Medicine); UcumLhcUtils.validateUnitString and convertUnitTo',
    generated: new Date().toISOString().slice(0, 10),
    units_source: 'service/src/clinical/units.rs (codes and dimensions only)',
    units,
    base_units: baseUnits,
    spellings,
    chemistry,
  };
}

const data = compute();
const text = JSON.stringify(data, null, 2) + '\n';

if (process.argv.includes('--check')) {
  if (!existsSync(OUTPUT)) fail('ucum-check-values.json is missing; run without --check');
  const committed = JSON.parse(readFileSync(OUTPUT, 'utf8'));
  const strip = ({ generated, ...rest }) => rest;
  const a = strip(committed);
  const b = strip(JSON.parse(text));
  if (!isDeepStrictEqual(a, b)) {
    const keys = [...new Set([...Object.keys(a), ...Object.keys(b)])].filter((k) => !isDeepStrictEqual(a[k], b[k]));
    fail(`ucum-check-values.json is out of date (differs at: ${keys.join(', ')}); regenerate with: node ucum_check_values.mjs`);
  }
  console.log(`ucum-check-values.json is up to date (${LIB} ${libVersion})`);
} else {
  writeFileSync(OUTPUT, text);
  console.log(`wrote ucum-check-values.json (${LIB} ${libVersion}, ${data.units.length} units)`);
}
