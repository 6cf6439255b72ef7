// End-to-end test of the workbench page: starts the real calcium-cds binary,
// drives the page in headless Chromium and checks what a person would see.
//
//   node tests/workbench/e2e.mjs PATH_TO_BINARY
//
// Prints one line per check (`ok - name` / `not ok - name: reason`), then
// `N passed, N failed` alone on a line; exits 1 if any check failed.

import { spawn } from 'node:child_process';
import fs from 'node:fs';
import net from 'node:net';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';

import { chromium } from 'playwright-core';
import { PNG } from 'pngjs';

const HERE = path.dirname(fileURLToPath(import.meta.url));
const REPO = path.resolve(HERE, '..', '..');
const EXAMPLES = path.join(REPO, 'fhir-profiles', 'examples');
const SHOT_DIR = path.join(REPO, 'target', 'workbench');
const CHROMIUM = process.env.CHROMIUM_PATH || '/usr/bin/chromium';
const READY_TIMEOUT_MS = 30_000;
const UI_TIMEOUT_MS = 15_000;
// The badge colour for "High" in app.css (--sev-high: #b3261e).
const HIGH_BADGE_RGB = [0xb3, 0x26, 0x1e];

const binary = process.argv[2];
if (!binary) {
  console.error('usage: node tests/workbench/e2e.mjs PATH_TO_BINARY');
  process.exit(2);
}

// ---- check bookkeeping ------------------------------------------------------

let passed = 0;
let failed = 0;
let skipped = 0;

class Skip extends Error {}

/** Run one named check; a thrown Error fails it, a thrown Skip skips it. */
async function check(name, fn) {
  try {
    const note = await fn();
    passed += 1;
    console.log(`ok - ${name}${note ? ` (${note})` : ''}`);
    return true;
  } catch (err) {
    if (err instanceof Skip) {
      skipped += 1;
      console.log(`ok - ${name} # SKIP ${err.message}`);
      return null;
    }
    failed += 1;
    const msg = String((err && err.message) || err).split('\n')[0];
    console.log(`not ok - ${name}: ${msg}`);
    return false;
  }
}

let pageLoaded = false;
let workbenchServed = false;

/** A check that needs the page: fails at once, without waiting, if it did not load. */
function pageCheck(name, fn) {
  return check(name, () => {
    if (!pageLoaded) throw new Error('the workbench page did not load (see the checks above)');
    return fn();
  });
}

function assert(cond, msg) {
  if (!cond) throw new Error(msg);
}

// ---- the service -------------------------------------------------------------

function freePort() {
  return new Promise((resolve, reject) => {
    const srv = net.createServer();
    srv.unref();
    srv.on('error', reject);
    srv.listen(0, '127.0.0.1', () => {
      const { port } = srv.address();
      srv.close(() => resolve(port));
    });
  });
}

const children = new Set();

async function startService(extraEnv = {}) {
  const port = await freePort();
  const base = `http://127.0.0.1:${port}`;
  const child = spawn(binary, ['serve', '--listen', `127.0.0.1:${port}`], {
    env: { ...process.env, ...extraEnv },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  children.add(child);
  let log = '';
  const keep = (b) => { log = (log + b.toString()).slice(-4000); };
  child.stdout.on('data', keep);
  child.stderr.on('data', keep);
  let exited = null;
  child.on('exit', (code, signal) => { exited = { code, signal }; children.delete(child); });
  child.on('error', (err) => { exited = { code: null, signal: String(err.message) }; children.delete(child); });
  const deadline = Date.now() + READY_TIMEOUT_MS;
  while (Date.now() < deadline) {
    if (exited) throw new Error(`the binary exited early (${exited.code ?? exited.signal}): ${log.trim().slice(-400)}`);
    try {
      const r = await fetch(`${base}/readyz`, { signal: AbortSignal.timeout(2000) });
      if (r.status === 200) return { child, base, log: () => log };
    } catch (_) { /* not up yet */ }
    await new Promise((r) => setTimeout(r, 200));
  }
  await stopService(child);
  throw new Error(`GET /readyz did not answer 200 within ${READY_TIMEOUT_MS / 1000} s: ${log.trim().slice(-400)}`);
}

async function stopService(child) {
  if (!child || child.exitCode !== null || child.signalCode !== null) return;
  const gone = new Promise((r) => child.once('exit', r));
  child.kill('SIGTERM');
  const t = setTimeout(() => child.kill('SIGKILL'), 5000);
  await gone;
  clearTimeout(t);
}

function stopAllSync() {
  for (const c of children) {
    try { c.kill('SIGKILL'); } catch (_) { /* already gone */ }
  }
}
process.on('exit', stopAllSync);
for (const sig of ['SIGINT', 'SIGTERM']) {
  process.on(sig, () => { stopAllSync(); process.exit(130); });
}

// ---- PNG helpers -------------------------------------------------------------

function decodePng(buf) {
  return PNG.sync.read(buf);
}

/** Colour counts, quantized to 4 bits a channel so antialiasing does not dominate. */
function colourStats(png) {
  const counts = new Map();
  const { data, width, height } = png;
  for (let i = 0; i < width * height * 4; i += 4) {
    const key = ((data[i] >> 4) << 8) | ((data[i + 1] >> 4) << 4) | (data[i + 2] >> 4);
    counts.set(key, (counts.get(key) || 0) + 1);
  }
  let top = 0;
  for (const c of counts.values()) top = Math.max(top, c);
  return { distinct: counts.size, topShare: top / (width * height) };
}

/** The most common colour that is not near white, as the mean of its pixels. */
function dominantNonWhite(png) {
  const buckets = new Map();
  const { data, width, height } = png;
  for (let i = 0; i < width * height * 4; i += 4) {
    const [r, g, b] = [data[i], data[i + 1], data[i + 2]];
    if (r > 225 && g > 225 && b > 225) continue;
    const key = ((r >> 3) << 10) | ((g >> 3) << 5) | (b >> 3);
    const e = buckets.get(key) || { n: 0, r: 0, g: 0, b: 0 };
    e.n += 1; e.r += r; e.g += g; e.b += b;
    buckets.set(key, e);
  }
  let best = null;
  for (const e of buckets.values()) if (!best || e.n > best.n) best = e;
  return best ? { rgb: [best.r / best.n, best.g / best.n, best.b / best.n].map(Math.round), n: best.n } : null;
}

// ---- page helpers ------------------------------------------------------------

// The shipped examples are dated for this evaluation time; the service's clock
// is the real one, so each request fixes `now` with a Parameters part (results
// older than the rule set's window would otherwise be set aside).
const EXAMPLE_NOW = '2026-11-30T15:00:00Z';

/** A request file wrapped in Parameters with `now` fixed, as pretty JSON text. */
function withNow(file) {
  const doc = JSON.parse(fs.readFileSync(file, 'utf8'));
  const now = { name: 'now', valueDateTime: EXAMPLE_NOW };
  const wrapped = doc.resourceType === 'Parameters'
    ? { ...doc, parameter: [...(doc.parameter || []), now] }
    : { resourceType: 'Parameters', parameter: [{ name: 'bundle', resource: doc }, now] };
  return JSON.stringify(wrapped, null, 2);
}
const readExample = (name) => withNow(path.join(EXAMPLES, name));

/** Click Assess and wait until that run has finished (body[data-runs] moves on). */
async function runAssess(page) {
  const before = Number(await page.getAttribute('body', 'data-runs')) || 0;
  await page.click('#assess');
  await page.waitForFunction((n) => Number(document.body.getAttribute('data-runs') || 0) > n, before, { timeout: UI_TIMEOUT_MS });
  return page.getAttribute('body', 'data-state');
}

const text = async (page, sel) => ((await page.locator(sel).first().textContent({ timeout: UI_TIMEOUT_MS })) || '').trim();

async function postAssess(base, body) {
  const r = await fetch(`${base}/fhir/$assess?_explain=true`, {
    method: 'POST',
    headers: { 'Content-Type': 'application/fhir+json', Accept: 'application/fhir+json' },
    body,
  });
  return { status: r.status, doc: await r.json().catch(() => null) };
}

// ---- the run -----------------------------------------------------------------

async function main() {
  let svc = null;
  let browser = null;
  const tmpDir = fs.mkdtempSync(path.join(os.tmpdir(), 'calcium-wb-'));
  try {
    const started = await check('service starts and GET /readyz answers 200', async () => {
      svc = await startService();
      return svc.base;
    });
    if (!started) return;
    const { base } = svc;
    const origin = new URL(base).origin;

    await check('GET /workbench answers 200 HTML with a Content-Security-Policy header', async () => {
      const r = await fetch(`${base}/workbench`);
      assert(r.status === 200, `status ${r.status}`);
      workbenchServed = true;
      assert((r.headers.get('content-type') || '').includes('text/html'), `content-type ${r.headers.get('content-type')}`);
      const csp = r.headers.get('content-security-policy');
      assert(csp, 'no Content-Security-Policy header');
      assert(/default-src 'self'/.test(csp) && /script-src 'self'/.test(csp), `unexpected policy: ${csp}`);
      assert(!/unsafe-inline|unsafe-eval/.test(csp), `policy allows unsafe code: ${csp}`);
      return csp;
    });

    await check('GET /workbench/, /workbench/app.js and /workbench/app.css answer 200', async () => {
      for (const [p, type] of [['/workbench/', 'text/html'], ['/workbench/app.js', 'javascript'], ['/workbench/app.css', 'text/css']]) {
        const r = await fetch(`${base}${p}`);
        assert(r.status === 200, `${p}: status ${r.status}`);
        assert((r.headers.get('content-type') || '').includes(type), `${p}: content-type ${r.headers.get('content-type')}`);
      }
    });

    browser = await chromium.launch({
      executablePath: CHROMIUM,
      args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
        '--disable-background-networking', '--disable-component-update', '--disable-sync'],
    });
    const context = await browser.newContext({ acceptDownloads: true, viewport: { width: 1280, height: 900 } });
    const page = await context.newPage();
    page.setDefaultTimeout(UI_TIMEOUT_MS);

    const requests = [];
    const failedRequests = [];
    const consoleErrors = [];
    page.on('request', (r) => requests.push(r.url()));
    page.on('requestfailed', (r) => failedRequests.push(`${r.url()} (${r.failure() && r.failure().errorText})`));
    page.on('console', (m) => { if (m.type() === 'error') consoleErrors.push(`${m.text()} @ ${m.location().url || '?'}`); });
    page.on('pageerror', (e) => consoleErrors.push(`page error: ${e.message}`));
    // The only failed responses the page may cause: the scenario list while the
    // service has none (404) and the refusals this test asks for (4xx).
    const expectedError = (t) => /Failed to load resource: the server responded with a status of 4\d\d/.test(t);

    let scenariosStatus = null;
    try { scenariosStatus = (await fetch(`${base}/workbench/scenarios`)).status; } catch (_) { scenariosStatus = null; }

    await check('page loads with no console errors', async () => {
      const resp = await page.goto(`${base}/workbench`, { waitUntil: 'load' });
      assert(resp && resp.status() === 200, `status ${resp && resp.status()}`);
      await page.waitForSelector('#scenario-status[data-state]');
      const title = await page.title();
      assert(/workbench/i.test(title), `title "${title}"`);
      pageLoaded = true;
      const bad = consoleErrors.filter((t) => !(scenariosStatus === 404 && expectedError(t)));
      assert(bad.length === 0, bad.join(' | '));
    });

    await pageCheck('page shows the permanent advisory banner', async () => {
      const t = await text(page, '[data-testid="advisory-banner"]');
      assert(/advisory/i.test(t) && /draft/i.test(t) && /protocol/i.test(t) && /formulary/i.test(t) && /never orders/i.test(t), `banner: ${t}`);
      assert(await page.locator('[data-testid="advisory-banner"]').isVisible(), 'banner not visible');
    });

    await pageCheck('every form control has a label', async () => {
      const unlabelled = await page.$$eval('input, select, textarea', (els) =>
        els.filter((e) => !(e.labels && e.labels.length) && !e.getAttribute('aria-label')).map((e) => e.id || e.outerHTML.slice(0, 60)));
      assert(unlabelled.length === 0, `no label: ${unlabelled.join(', ')}`);
    });

    await pageCheck('page has no inline script or style (CSP-clean markup)', async () => {
      const found = await page.evaluate(() => ({
        inlineScripts: [...document.scripts].filter((s) => !s.src).length,
        styleBlocks: document.querySelectorAll('style').length,
        styleAttrs: document.querySelectorAll('[style]').length,
        handlers: [...document.querySelectorAll('*')].filter((e) => [...e.attributes].some((a) => a.name.startsWith('on'))).length,
      }));
      assert(Object.values(found).every((n) => n === 0), JSON.stringify(found));
    });

    // -- paste the seizure toddler --------------------------------------------
    const toddler = readExample('ionized-low-seizure-toddler.json');
    let toddlerState = null;
    await pageCheck('paste a request and Assess: hypocalcemia 0.82 mmol/L, severity "High"', async () => {
      await page.fill('#request-json', toddler);
      toddlerState = await runAssess(page);
      assert(toddlerState === 'assessed', `page state ${toddlerState}: ${await text(page, '#request-status')}`);
      const headline = await text(page, '[data-testid="status-headline"]');
      assert(/hypocalcemia/i.test(headline) && !/^no /i.test(headline), `headline "${headline}"`);
      const value = await text(page, '[data-testid="status-value"]');
      assert(value.startsWith('0.82') && value.includes('mmol/L'), `value "${value}"`);
      const badge = await text(page, '[data-testid="severity-badge"]');
      assert(badge === 'High', `severity badge "${badge}"`);
      const interval = await text(page, '[data-testid="status-interval"]');
      assert(/1\.11\s*-\s*1\.30 mmol\/L/.test(interval), `interval "${interval}"`);
      const band = await text(page, '[data-testid="status-band"]');
      assert(band.length > 0, 'no age band');
    });

    await pageCheck('treatment proposals show the bolus arithmetic as drafts', async () => {
      const items = page.locator('[data-testid="treatment"]');
      const n = await items.count();
      assert(n >= 1, 'no treatment proposal shown');
      const arith = await text(page, '[data-testid="treatment-arithmetic"]');
      assert(/\d+(\.\d+)? kg x \d+(\.\d+)? mg\/kg = \d+(\.\d+)? mg/.test(arith), `arithmetic "${arith.slice(0, 120)}"`);
      const all = await page.locator('[data-testid="treatment-panel"]').textContent();
      assert(/draft/i.test(all) && /advisory/i.test(all), 'treatment panel does not say draft and advisory');
    });

    await pageCheck('causes are listed in order, each labelled likely/possible/unlikely/ruled out', async () => {
      const labels = await page.$$eval('[data-testid="cause-label"]', (els) => els.map((e) => e.textContent.trim().toLowerCase()));
      assert(labels.length >= 1, 'no cause shown');
      const rank = { likely: 0, possible: 1, unlikely: 2, 'ruled out': 3 };
      assert(labels.every((l) => l in rank), `labels ${[...new Set(labels)].join(', ')}`);
      for (let i = 1; i < labels.length; i++) assert(rank[labels[i]] >= rank[labels[i - 1]], `out of order at ${i}: ${labels[i - 1]} then ${labels[i]}`);
      const basis = await text(page, '[data-testid="cause-basis"]');
      assert(basis.length > 10, 'cause has no basis');
      return `${labels.length} causes`;
    });

    await pageCheck('next tests are shown as draft proposals', async () => {
      const n = await page.locator('[data-testid="next-test"]').count();
      assert(n >= 1, 'no next test shown');
      const t = await text(page, '[data-testid="next-test"]');
      assert(/draft/i.test(t), `first test "${t.slice(0, 80)}"`);
      return `${n} tests`;
    });

    await pageCheck('safety issues are sorted by severity and badged with text', async () => {
      const rows = await page.$$eval('[data-testid="safety-issue"]', (els) => els.map((e) => ({
        sev: e.getAttribute('data-severity'),
        badge: (e.querySelector('[data-testid="safety-severity"]') || {}).textContent,
      })));
      assert(rows.length >= 1, 'no safety issue shown');
      const order = { high: 0, moderate: 1, low: 2 };
      for (let i = 1; i < rows.length; i++) assert((order[rows[i].sev] ?? 9) >= (order[rows[i - 1].sev] ?? 9), `out of order: ${rows.map((r) => r.sev)}`);
      const words = { high: 'High', moderate: 'Moderate', low: 'Low' };
      for (const r of rows) assert(r.badge === words[r.sev], `badge "${r.badge}" for ${r.sev}`);
      return rows.map((r) => r.sev).join(', ');
    });

    await pageCheck('rule set version and hash are shown', async () => {
      const v = await text(page, '[data-testid="ruleset-version"]');
      const h = await text(page, '[data-testid="ruleset-hash"]');
      assert(v.length > 0, 'no version');
      assert(/^[0-9a-f]{12,64}$/.test(h), `hash "${h}"`);
      return `${v} ${h.slice(0, 12)}`;
    });

    await pageCheck('the explain section shows the steps of the trace', async () => {
      const direct = await postAssess(base, toddler);
      assert(direct.status === 200 && direct.doc, `direct $assess answered ${direct.status}`);
      const trace = (direct.doc.entry || []).map((e) => e.resource)
        .find((r) => r && r.resourceType === 'Parameters' && (r.parameter || []).some((p) => p.name === 'step' || p.name === 'rules'));
      const expected = trace ? trace.parameter.filter((p) => p.name === 'step').length : 0;
      const shown = await page.locator('[data-testid="explain-step"]').count();
      if (!trace) {
        assert(shown === 0, `page shows ${shown} steps but the Bundle has no trace`);
        const note = await text(page, '[data-testid="explain-absent"]');
        throw new Error(`the result Bundle has no explain Parameters; the page says: "${note}"`);
      }
      assert(expected >= 1, 'the trace has no step');
      assert(shown === expected, `page shows ${shown} steps, the trace has ${expected}`);
      const stages = await page.$$eval('[data-testid="explain-stage"]', (els) => els.map((e) => e.getAttribute('data-stage')));
      return `${shown} steps in stages ${stages.join(', ')}`;
    });

    await pageCheck('full-page screenshot really rendered, and the "High" badge is in its colour', async () => {
      assert(toddlerState === 'assessed', 'no assessed page to photograph');
      await page.evaluate(() => window.scrollTo(0, 0));
      fs.mkdirSync(SHOT_DIR, { recursive: true });
      const file = path.join(SHOT_DIR, 'assessed.png');
      await page.screenshot({ path: file, fullPage: true });
      const png = decodePng(fs.readFileSync(file));
      assert(png.width >= 1000 && png.width <= 4000, `width ${png.width}`);
      assert(png.height >= 900 && png.height <= 40000, `height ${png.height}`);
      const { distinct, topShare } = colourStats(png);
      assert(distinct >= 40, `only ${distinct} distinct colours`);
      assert(topShare < 0.9, `one colour covers ${(topShare * 100).toFixed(1)}% of the page`);
      const badgePng = decodePng(await page.locator('[data-testid="severity-badge"]').screenshot());
      const dom = dominantNonWhite(badgePng);
      assert(dom, 'badge screenshot is all white');
      const dist = Math.max(...dom.rgb.map((c, i) => Math.abs(c - HIGH_BADGE_RGB[i])));
      assert(dist <= 24, `badge colour rgb(${dom.rgb}) is not rgb(${HIGH_BADGE_RGB})`);
      return `${png.width}x${png.height}, ${distinct} colours, badge rgb(${dom.rgb}); ${path.relative(REPO, file)}`;
    });

    await pageCheck('"Download result Bundle" gives a JSON file with resourceType Bundle', async () => {
      const [download] = await Promise.all([page.waitForEvent('download'), page.click('#download-bundle')]);
      assert(download.suggestedFilename() === 'result-bundle.json', `file name ${download.suggestedFilename()}`);
      const p = await download.path();
      const doc = JSON.parse(fs.readFileSync(p, 'utf8'));
      assert(doc.resourceType === 'Bundle', `resourceType ${doc.resourceType}`);
      assert((doc.entry || []).some((e) => e.resource && e.resource.resourceType === 'GuidanceResponse'), 'no GuidanceResponse in the file');
      return `${doc.entry.length} entries`;
    });

    // -- upload a file ------------------------------------------------------------
    await pageCheck('load a file (total calcium, low albumin) and Assess: the adjusted calcium is shown', async () => {
      const upload = path.join(tmpDir, 'total-calcium-low-albumin-child.json');
      fs.writeFileSync(upload, readExample('total-calcium-low-albumin-child.json'));
      await page.setInputFiles('#request-file', upload);
      await page.waitForFunction(() => /Loaded total-calcium-low-albumin-child\.json/.test(document.getElementById('request-status').textContent));
      const loaded = await page.inputValue('#request-json');
      assert(loaded === fs.readFileSync(upload, 'utf8'), 'the file did not reach the text area unchanged');
      const state = await runAssess(page);
      assert(state === 'assessed', `page state ${state}`);
      const box = page.locator('[data-testid="adjusted-calcium"]');
      assert(await box.isVisible(), 'no adjusted calcium shown');
      const v = await text(page, '[data-testid="adjusted-value"]');
      assert(v === '2.18 mmol/L', `adjusted value "${v}"`);
      const arith = await text(page, '[data-testid="adjusted-arithmetic"]');
      assert(/7\.60 \+ 0\.80 x \(4\.0 - 2\.60\) = 8\.72 mg\/dL = 2\.18 mmol\/L/.test(arith), `arithmetic "${arith}"`);
      const sv = await text(page, '[data-testid="status-value"]');
      assert(sv.startsWith('2.18'), `status value "${sv}"`);
    });

    await pageCheck('inputs set aside are listed with their reasons and elements', async () => {
      await page.fill('#request-json', readExample('set-aside-mix.json'));
      const state = await runAssess(page);
      assert(state === 'assessed', `page state ${state}`);
      const rows = await page.$$eval('[data-testid="setaside-issue"]', (els) => els.map((e) => e.textContent));
      assert(rows.length >= 5, `${rows.length} rows`);
      assert(rows.some((t) => /entered-in-error/.test(t) && /entry\[3\]\.resource\.status/.test(t)), 'entered-in-error row with its element missing');
      return `${rows.length} rows`;
    });

    await pageCheck('safety issues of mixed severity are shown high first (digoxin case)', async () => {
      await page.fill('#request-json', withNow(path.join(REPO, 'tests', 'cases', 'safety-digoxin-toddler.json')));
      const state = await runAssess(page);
      assert(state === 'assessed', `page state ${state}`);
      const rows = await page.$$eval('[data-testid="safety-issue"]', (els) => els.map((e) => [e.getAttribute('data-severity'), e.getAttribute('data-key'),
        (e.querySelector('[data-testid="safety-severity"]') || {}).textContent]));
      const sevs = rows.map((r) => r[0]);
      assert(sevs.includes('high') && sevs.includes('moderate'), `severities ${sevs.join(', ')}`);
      assert(sevs.lastIndexOf('high') < sevs.indexOf('moderate'), `order ${sevs.join(', ')}`);
      assert(rows.every((r) => r[2] === { high: 'High', moderate: 'Moderate', low: 'Low' }[r[0]]), `badges ${rows.map((r) => r[2])}`);
      return rows.map((r) => `${r[1]}:${r[0]}`).join(', ');
    });

    // -- synthetic scenario --------------------------------------------------------
    await pageCheck('pick a scenario, Make bundle, Assess', async () => {
      if (scenariosStatus === 404) {
        const t = await text(page, '#scenario-status');
        assert(/scenarios unavailable/i.test(t), `page does not say scenarios are unavailable: "${t}"`);
        throw new Error('GET /workbench/scenarios answers 404; the page says "Scenarios unavailable"');
      }
      assert(scenariosStatus === 200, `GET /workbench/scenarios answered ${scenariosStatus}`);
      await page.waitForSelector('#scenario-status[data-state="ready"]');
      const options = await page.$$eval('#scenario-select optgroup', (gs) => gs.map((g) => ({ label: g.label, values: [...g.querySelectorAll('option')].map((o) => o.value) })));
      assert(options.length >= 1, 'no option groups');
      const pick = (options.find((g) => /cause/i.test(g.label)) || options[0]).values[0];
      await page.selectOption('#scenario-select', pick);
      await page.fill('#synth-age', '18mo');
      await page.fill('#synth-seed', '7');
      await page.selectOption('#synth-sex', 'female');
      await page.click('#make-bundle');
      await page.waitForFunction(() => document.getElementById('scenario-status').getAttribute('data-state') !== 'busy');
      const made = await page.getAttribute('#scenario-status', 'data-state');
      assert(made === 'made', `Make bundle: ${await text(page, '#scenario-status')}`);
      const doc = JSON.parse(await page.inputValue('#request-json'));
      assert(doc.resourceType === 'Bundle', `made a ${doc.resourceType}`);
      const state = await runAssess(page);
      assert(state === 'assessed', `page state ${state}: ${await text(page, '#request-status')}`);
      const headline = await text(page, '[data-testid="status-headline"]');
      assert(headline.length > 0, 'no status headline');
      return `${pick}: ${headline}`;
    });

    await pageCheck('a bad synthetic age is refused with a reason', async () => {
      if (scenariosStatus === 404) throw new Error('GET /workbench/scenarios answers 404');
      await page.fill('#synth-age', 'twelve');
      await page.click('#make-bundle');
      await page.waitForFunction(() => document.getElementById('scenario-status').getAttribute('data-state') !== 'busy');
      const st = await page.getAttribute('#scenario-status', 'data-state');
      const t = await text(page, '#scenario-status');
      assert(st === 'refused' && /400/.test(t), `state ${st}: "${t}"`);
      await page.fill('#synth-age', '18mo');
    });

    // -- a saved case, assessed as of its own clock -----------------------------------
    await pageCheck('a saved case pasted as it is, with its evaluation time, is assessed as of that time', async () => {
      // tests/cases/safety-digoxin-toddler.json is a plain Bundle dated 2026-11-30; its
      // expectation's now is 2026-11-30T15:00:00Z. Without the clock its results would be
      // judged against the real clock.
      const file = path.join(REPO, 'tests', 'cases', 'safety-digoxin-toddler.json');
      await page.fill('#request-json', fs.readFileSync(file, 'utf8'));
      await page.fill('#eval-time', EXAMPLE_NOW);
      const state = await runAssess(page);
      assert(state === 'assessed', `page state ${state}`);
      const t = await text(page, '#result');
      assert(/0\.82/.test(t) && /digoxin/i.test(t), 'the case result is not shown');
      // The clock really is sent: five days later the same calcium is too old to judge.
      await page.fill('#eval-time', '2026-12-05T15:00:00Z');
      const later = await runAssess(page);
      await page.fill('#eval-time', '');
      const t2 = await text(page, '#result');
      assert(later === 'assessed' && /older than 72 h/.test(t2) && !/Severity\s*High/.test(t2), 'a later clock changed nothing');
      return 'digoxin case as of 2026-11-30T15:00:00Z, then as of 2026-12-05';
    });

    // -- refusals ------------------------------------------------------------------
    await pageCheck('a Bundle without type is refused, showing the issue and its element', async () => {
      await page.fill('#request-json', '{"resourceType":"Bundle"}');
      const state = await runAssess(page);
      assert(state === 'refused', `page state ${state}`);
      assert(await page.locator('#refusal').isVisible(), 'refusal not visible');
      assert(!(await page.locator('#result').isVisible()), 'an old result is still shown');
      const h = await text(page, '#refusal-heading');
      assert(h === 'The request was not accepted', `heading "${h}"`);
      const issues = await page.locator('[data-testid="refusal-issue"]').count();
      assert(issues >= 1, 'no issue listed');
      const elements = await page.$$eval('[data-testid="refusal-element"]', (els) => els.map((e) => e.textContent));
      assert(elements.some((e) => /^Bundle/.test(e)), `elements: ${elements.join(', ')}`);
      return elements.join(', ');
    });

    await pageCheck('invalid JSON is refused with the reason', async () => {
      await page.fill('#request-json', '{"resourceType": "Bundle", ');
      const state = await runAssess(page);
      assert(state === 'refused', `page state ${state}`);
      const t = await text(page, '[data-testid="refusal-issue"]');
      assert(/json/i.test(t), `issue "${t}"`);
    });

    await pageCheck('no console errors during the run (other than the expected 4xx answers)', async () => {
      const bad = consoleErrors.filter((t) => !expectedError(t));
      assert(bad.length === 0, bad.join(' | '));
      return `${consoleErrors.length} expected 4xx notices`;
    });

    await pageCheck('every request the page made was to the same origin, and none failed', async () => {
      assert(requests.length >= 3, `only ${requests.length} requests seen`);
      const foreign = requests.filter((u) => { try { return new URL(u).origin !== origin && !u.startsWith('blob:') && !u.startsWith('data:'); } catch (_) { return true; } });
      assert(foreign.length === 0, `other origins: ${foreign.join(', ')}`);
      assert(failedRequests.length === 0, `failed: ${failedRequests.join(', ')}`);
      return `${requests.length} requests`;
    });

    await browser.close();
    browser = null;
    await stopService(svc.child);
    svc = null;

    // -- the off switch --------------------------------------------------------------
    await check('with CALCIUM_CDS_WORKBENCH=false, GET /workbench answers 404', async () => {
      assert(workbenchServed, 'the workbench was not served with the switch on either, so the switch cannot be told apart');
      const off = await startService({ CALCIUM_CDS_WORKBENCH: 'false' });
      try {
        const r = await fetch(`${off.base}/workbench`);
        assert(r.status === 404, `status ${r.status}`);
        const a = await fetch(`${off.base}/workbench/app.js`);
        assert(a.status === 404, `/workbench/app.js status ${a.status}`);
      } finally {
        await stopService(off.child);
      }
    });
  } finally {
    if (browser) await browser.close().catch(() => {});
    if (svc) await stopService(svc.child);
    for (const c of [...children]) await stopService(c);
    fs.rmSync(tmpDir, { recursive: true, force: true });
  }
}

try {
  await main();
} catch (err) {
  failed += 1;
  console.log(`not ok - the test itself: ${String((err && err.stack) || err).split('\n').slice(0, 3).join(' ')}`);
}
if (skipped) console.log(`# ${skipped} skipped`);
console.log(`${passed} passed, ${failed} failed`);
process.exit(failed ? 1 : 0);
