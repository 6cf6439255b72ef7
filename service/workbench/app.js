// calcium-cds workbench: plain ES2020, no libraries, no inline code (the page
// is served under a strict Content-Security-Policy). Every text that comes
// from a request or a result is put in the page as text, never as HTML.
'use strict';

(() => {
  const ASSESS_URL = '/fhir/$assess?_explain=true';
  const FHIR_JSON = 'application/fhir+json';
  const SID_SAFETY = '/sid/safety-check';
  const SID_TEST = '/sid/next-test';
  const SID_TREATMENT = '/sid/treatment-proposal';
  const FALLBACK_ADVISORY =
    'Advisory only: decision support for licensed clinicians, not a diagnosis or an order. ' +
    'Local protocols and formulary come first.';

  const SEVERITY_ORDER = { high: 0, moderate: 1, low: 2 };
  const SEVERITY_WORD = { high: 'High', moderate: 'Moderate', low: 'Low' };
  const ISSUE_SEVERITY_WORD = { fatal: 'Fatal', error: 'Error', warning: 'Warning', information: 'Information' };
  const GUIDANCE_STATUS_WORD = {
    success: 'Complete',
    'data-required': 'More data needed (see below)',
    'data-requested': 'More data requested',
    'in-progress': 'In progress',
    failure: 'Could not be assessed',
    'entered-in-error': 'Entered in error',
  };
  const GROUP_LABEL = {
    cause: 'Causes of hypocalcemia',
    safety: 'Safety checks',
    'bad-input': 'Inputs that are set aside',
    baseline: 'Baseline (no hypocalcemia)',
  };
  const GROUP_ORDER = ['baseline', 'cause', 'safety', 'bad-input'];
  const STAGE_ORDER = ['input', 'status', 'causes', 'tests', 'treatment', 'safety'];
  const STAGE_LABEL = {
    input: 'Reading the request',
    status: 'Calcium status',
    causes: 'Causes',
    tests: 'Next tests',
    treatment: 'Treatment',
    safety: 'Safety checks',
  };

  const $ = (id) => document.getElementById(id);
  let lastResultText = null;
  let scenarios = [];
  let runs = 0; // finished Assess runs, as body[data-runs], so a test can wait for the next one

  // ---- small DOM helpers -------------------------------------------------

  /** Make an element; attrs: class, text, testid, or any attribute. */
  function el(tag, attrs, ...children) {
    const node = document.createElement(tag);
    for (const [k, v] of Object.entries(attrs || {})) {
      if (v === undefined || v === null || v === false) continue;
      if (k === 'class') node.className = v;
      else if (k === 'text') node.textContent = String(v);
      else if (k === 'testid') node.setAttribute('data-testid', v);
      else node.setAttribute(k, v === true ? '' : String(v));
    }
    for (const c of children.flat(Infinity)) {
      if (c === undefined || c === null || c === false) continue;
      node.append(c instanceof Node ? c : document.createTextNode(String(c)));
    }
    return node;
  }

  function clear(node) {
    while (node.firstChild) node.removeChild(node.firstChild);
    return node;
  }

  function empty(text, testid) {
    return el('p', { class: 'empty', text, testid });
  }

  function kv(pairs, attrs) {
    const dl = el('dl', Object.assign({ class: 'kv' }, attrs || {}));
    for (const [k, v, testid] of pairs) {
      if (v === undefined || v === null || v === '') continue;
      dl.append(el('dt', { text: k }), el('dd', { testid }, v));
    }
    return dl;
  }

  function badge(text, cls, testid) {
    return el('span', { class: `badge ${cls}`, text, testid });
  }

  function severityBadge(sev, testid) {
    const s = String(sev || '').toLowerCase();
    const word = SEVERITY_WORD[s] || (s ? s[0].toUpperCase() + s.slice(1) : 'Not given');
    return badge(word, SEVERITY_WORD[s] ? `sev-${s}` : 'sev-info', testid);
  }

  function setStatus(node, text, isError) {
    node.textContent = text || '';
    node.classList.toggle('error', Boolean(isError));
  }

  // ---- FHIR helpers --------------------------------------------------------

  const textOf = (cc) => {
    if (!cc) return '';
    if (cc.text) return cc.text;
    const c = (cc.coding || []).find((x) => x.display) || (cc.coding || [])[0];
    return c ? c.display || c.code || '' : '';
  };

  const quantityText = (q) => {
    if (!q || q.value === undefined) return '';
    return `${q.value}${q.unit || q.code ? ' ' + (q.unit || q.code) : ''}`;
  };

  const identifierValue = (res, suffix) => {
    const id = (res.identifier || []).find((i) => typeof i.system === 'string' && i.system.endsWith(suffix));
    return id ? id.value : null;
  };

  /** Index the request's resources by fullUrl and Type/id, for evidence look-ups. */
  function indexRequest(doc) {
    const map = new Map();
    const addBundle = (b) => {
      for (const e of (b && b.entry) || []) {
        const r = e && e.resource;
        if (!r) continue;
        if (e.fullUrl) map.set(e.fullUrl, r);
        if (r.resourceType && r.id) map.set(`${r.resourceType}/${r.id}`, r);
      }
    };
    if (!doc || typeof doc !== 'object') return map;
    if (doc.resourceType === 'Bundle') addBundle(doc);
    if (doc.resourceType === 'Parameters') {
      for (const p of doc.parameter || []) {
        const r = p.resource;
        if (!r) continue;
        if (r.resourceType === 'Bundle') addBundle(r);
        else if (r.resourceType && r.id) map.set(`${r.resourceType}/${r.id}`, r);
      }
    }
    return map;
  }

  function describeReference(ref, requestIndex, resultIndex) {
    const key = ref && ref.reference;
    const r = key ? requestIndex.get(key) || resultIndex.get(key) : null;
    const where = key || ref.display || ref.type || 'reference';
    if (!r) return `${ref.type || 'Resource'} ${where}`;
    let what = r.resourceType;
    if (r.resourceType === 'Observation') {
      what = textOf(r.code) || 'Observation';
      const v = quantityText(r.valueQuantity);
      if (v) what += ` ${v}`;
      if (r.effectiveDateTime) what += ` at ${r.effectiveDateTime}`;
    } else if (r.resourceType === 'Condition') {
      what = `Condition: ${textOf(r.code)}`;
      if (r.onsetDateTime) what += ` (onset ${r.onsetDateTime})`;
    } else if (r.code) {
      what = `${r.resourceType}: ${textOf(r.code)}`;
    }
    return `${what} — ${where}`;
  }

  function patientLine(requestIndex) {
    for (const r of requestIndex.values()) {
      if (r.resourceType !== 'Patient') continue;
      const n = (r.name || [])[0];
      const name = n ? [...(n.given || []), n.family].filter(Boolean).join(' ') || n.text : '';
      const parts = [name || 'Unnamed patient'];
      if (r.gender) parts.push(r.gender);
      if (r.birthDate) parts.push(`born ${r.birthDate}`);
      const mrn = (r.identifier || [])[0];
      if (mrn && mrn.value) parts.push(`identifier ${mrn.value}`);
      return parts.join(', ');
    }
    return '';
  }

  // ---- scenarios ---------------------------------------------------------

  async function loadScenarios() {
    const select = $('scenario-select');
    const status = $('scenario-status');
    try {
      const resp = await fetch('/workbench/scenarios', { headers: { Accept: 'application/json' } });
      if (!resp.ok) throw new Error(`the service answered ${resp.status}`);
      const body = await resp.json();
      if (!body || !Array.isArray(body.scenarios)) throw new Error('the answer had no scenario list');
      scenarios = body.scenarios.filter((s) => s && typeof s.name === 'string');
      if (scenarios.length === 0) throw new Error('the list is empty');
    } catch (err) {
      scenarios = [];
      clear(select).append(el('option', { value: '', text: 'Scenarios unavailable' }));
      select.disabled = true;
      $('make-bundle').disabled = true;
      setStatus(status, `Scenarios unavailable (${err.message}). Paste or load a request instead.`, false);
      status.setAttribute('data-state', 'unavailable');
      return;
    }
    clear(select);
    const groups = [...new Set(scenarios.map((s) => s.group || 'other'))].sort(
      (a, b) => (GROUP_ORDER.indexOf(a) + 1 || 99) - (GROUP_ORDER.indexOf(b) + 1 || 99),
    );
    for (const g of groups) {
      const og = el('optgroup', { label: GROUP_LABEL[g] || g });
      for (const s of scenarios.filter((x) => (x.group || 'other') === g)) {
        og.append(el('option', { value: s.name, text: s.name.replace(/-/g, ' ') }));
      }
      select.append(og);
    }
    select.disabled = false;
    $('make-bundle').disabled = false;
    status.setAttribute('data-state', 'ready');
    setStatus(status, `${scenarios.length} scenarios available. All patients are invented.`, false);
    showScenarioSummary();
  }

  function showScenarioSummary() {
    const s = scenarios.find((x) => x.name === $('scenario-select').value);
    $('scenario-summary').textContent = s ? s.summary || '' : '';
  }

  async function makeBundle() {
    const status = $('scenario-status');
    const name = $('scenario-select').value;
    if (!name) return setStatus(status, 'Pick a scenario first.', true);
    const q = new URLSearchParams({ scenario: name });
    const age = $('synth-age').value.trim();
    const seed = $('synth-seed').value.trim();
    const sex = $('synth-sex').value;
    if (age) q.set('age', age);
    if (seed) q.set('seed', seed);
    if (sex) q.set('sex', sex);
    setStatus(status, 'Making a synthetic request…', false);
    status.setAttribute('data-state', 'busy');
    try {
      const resp = await fetch(`/workbench/synth?${q}`, { headers: { Accept: FHIR_JSON } });
      const text = await resp.text();
      let doc = null;
      try { doc = JSON.parse(text); } catch (_) { doc = null; }
      if (!resp.ok) {
        const issues = doc && doc.resourceType === 'OperationOutcome' ? doc.issue || [] : [];
        const why = issues.map((i) => `${i.diagnostics || i.code}${i.expression ? ` (${i.expression.join(', ')})` : ''}`).join('; ');
        status.setAttribute('data-state', 'refused');
        return setStatus(status, `Not made (${resp.status}): ${why || text.slice(0, 200)}`, true);
      }
      $('request-json').value = doc ? JSON.stringify(doc, null, 2) : text;
      status.setAttribute('data-state', 'made');
      setStatus(status, `Request made for "${name}" (age ${age || 'default'}, seed ${seed || 'default'}${sex ? ', ' + sex : ''}). Press Assess.`, false);
    } catch (err) {
      status.setAttribute('data-state', 'error');
      setStatus(status, `Could not reach the service: ${err.message}`, true);
    }
  }

  // ---- file input --------------------------------------------------------

  function loadFile() {
    const input = $('request-file');
    const file = input.files && input.files[0];
    if (!file) return;
    const reader = new FileReader();
    reader.onload = () => {
      $('request-json').value = String(reader.result);
      setStatus($('request-status'), `Loaded ${file.name} (${file.size} bytes). Press Assess.`, false);
    };
    reader.onerror = () => setStatus($('request-status'), `Could not read ${file.name}.`, true);
    reader.readAsText(file);
  }

  // ---- assess ------------------------------------------------------------

  // A request assessed as of a given time: a Bundle goes into Parameters with `bundle` and
  // `now` parts; a Parameters resource gets its `now` part set.
  function withClock(doc, when) {
    const now = { name: 'now', valueDateTime: when };
    if (doc && doc.resourceType === 'Parameters' && Array.isArray(doc.parameter)) {
      return Object.assign({}, doc, { parameter: doc.parameter.filter((p) => p.name !== 'now').concat([now]) });
    }
    return { resourceType: 'Parameters', parameter: [{ name: 'bundle', resource: doc }, now] };
  }

  async function assess() {
    const status = $('request-status');
    const text = $('request-json').value;
    if (!text.trim()) {
      setStatus(status, 'Paste, load or make a request first.', true);
      runs += 1;
      document.body.setAttribute('data-runs', String(runs));
      return;
    }
    let requestDoc = null;
    try { requestDoc = JSON.parse(text); } catch (_) { requestDoc = null; }
    $('assess').disabled = true;
    setStatus(status, 'Assessing…', false);
    document.body.setAttribute('data-state', 'busy');
    try {
      // The text is sent as typed: the service, not this page, decides what it accepts.
      // With an evaluation time, a parsed request is wrapped in (or given) a `now` part.
      const evalTime = $('eval-time').value.trim();
      const resp = await fetch(ASSESS_URL, {
        method: 'POST',
        headers: { 'Content-Type': FHIR_JSON, Accept: FHIR_JSON },
        body: evalTime && requestDoc ? JSON.stringify(withClock(requestDoc, evalTime)) : text,
      });
      const body = await resp.text();
      let doc = null;
      try { doc = JSON.parse(body); } catch (_) { doc = null; }
      if (!resp.ok || !doc || doc.resourceType !== 'Bundle') {
        showRefusal(resp.status, doc, body);
        setStatus(status, `The service did not accept the request (HTTP ${resp.status}).`, true);
        document.body.setAttribute('data-state', 'refused');
        return;
      }
      lastResultText = body;
      showResult(doc, indexRequest(requestDoc));
      setStatus(status, `Assessed (HTTP ${resp.status}).`, false);
      document.body.setAttribute('data-state', 'assessed');
    } catch (err) {
      setStatus(status, `Could not reach the service: ${err.message}`, true);
      document.body.setAttribute('data-state', 'error');
    } finally {
      $('assess').disabled = false;
      runs += 1;
      document.body.setAttribute('data-runs', String(runs));
    }
  }

  function showRefusal(httpStatus, doc, raw) {
    $('result').classList.add('hidden');
    lastResultText = null;
    const section = $('refusal');
    const list = clear($('refusal-issues'));
    const issues = doc && doc.resourceType === 'OperationOutcome' ? doc.issue || [] : [];
    $('refusal-summary').textContent =
      `The service answered HTTP ${httpStatus} and gave ${issues.length || 'no'} reason${issues.length === 1 ? '' : 's'}. ` +
      'Nothing was assessed. Correct the request and try again.';
    for (const i of issues) {
      const where = [...(i.expression || []), ...(i.location || [])];
      list.append(
        el('li', { testid: 'refusal-issue' },
          badge(ISSUE_SEVERITY_WORD[i.severity] || i.severity || 'Issue', i.severity === 'warning' ? 'sev-moderate' : 'sev-high'),
          ' ',
          el('span', { text: i.diagnostics || textOf(i.details) || `(${i.code || 'no detail'})` }),
          el('div', { class: 'item-sub' },
            'Element: ',
            where.length
              ? where.map((w, n) => [n ? ', ' : '', el('span', { class: 'element', testid: 'refusal-element', text: w })])
              : el('span', { class: 'element', testid: 'refusal-element', text: '(the request as a whole)' }),
            i.code ? ` · issue type ${i.code}` : ''),
        ),
      );
    }
    if (!issues.length) {
      list.append(el('li', { testid: 'refusal-issue', text: raw ? raw.slice(0, 500) : 'No body.' }));
    }
    section.classList.remove('hidden');
    section.focus();
  }

  // ---- result rendering ----------------------------------------------------

  function showResult(bundle, requestIndex) {
    $('refusal').classList.add('hidden');
    const resources = (bundle.entry || []).map((e) => e.resource).filter(Boolean);
    const resultIndex = new Map();
    for (const e of bundle.entry || []) if (e.fullUrl && e.resource) resultIndex.set(e.fullUrl, e.resource);
    const ofType = (t) => resources.filter((r) => r.resourceType === t);

    const guidance = ofType('GuidanceResponse')[0] || null;
    const notes = ((guidance && guidance.note) || []).map((n) => n.text || '');
    const advisory = notes.find((n) => n.startsWith('Advisory only')) || FALLBACK_ADVISORY;
    const strip = (t) => (t || '').replace(advisory, '').trim();
    const ctx = { requestIndex, resultIndex, advisory, strip };

    const issues = ofType('DetectedIssue');
    const safety = issues.filter((r) => identifierValue(r, SID_SAFETY) !== null);
    const finding = issues.find((r) => identifierValue(r, SID_SAFETY) === null) || null;
    const derived = ofType('Observation').find((o) => (o.derivedFrom || []).length > 0) || ofType('Observation')[0] || null;
    const explain = ofType('Parameters').find((p) => (p.parameter || []).some((x) => x.name === 'step' || x.name === 'rules')) || null;

    renderStatus(guidance, notes, finding, derived, ctx);
    renderCauses(ofType('ClinicalImpression')[0] || null, ctx);
    renderTests(ofType('ServiceRequest'), notes, ctx);
    renderTreatment(ofType('MedicationRequest'), notes, ctx);
    renderSafety(safety, ctx);
    renderSetAside(ofType('OperationOutcome'));
    renderNotes(notes, advisory);
    renderExplain(explain);
    renderRuleset(guidance, notes, ofType('Provenance')[0], ofType('Device')[0], explain);

    const result = $('result');
    result.classList.remove('hidden');
    result.focus();
  }

  function advisoryLine(ctx) {
    return el('p', { class: 'item-sub advisory-line', text: ctx.advisory });
  }

  function renderStatus(guidance, notes, finding, derived, ctx) {
    const body = clear($('status-body'));
    const panel = $('status-panel');
    panel.classList.remove('sev-high', 'sev-moderate', 'sev-low', 'sev-none', 'sev-info');
    const normal = !finding && guidance && guidance.status === 'success' && /^No hypocalcemia/i.test(notes[0] || '');
    panel.classList.add(finding && SEVERITY_WORD[finding.severity] ? `sev-${finding.severity}` : normal ? 'sev-none' : 'sev-info');
    if (!guidance) {
      body.append(empty('The result has no GuidanceResponse, so no calcium status can be shown.'));
      return;
    }
    const summary = notes[0] || '';
    const head = el('div', { class: 'status-head' });
    if (finding) {
      head.append(el('span', { class: 'headline', text: textOf(finding.code) || 'Hypocalcemia', testid: 'status-headline' }),
        el('span', { class: 'item-sub', text: 'Severity' }),
        severityBadge(finding.severity, 'severity-badge'));
    } else if (guidance.status === 'success' && /^No hypocalcemia/i.test(summary)) {
      head.append(el('span', { class: 'headline', text: 'No hypocalcemia', testid: 'status-headline' }),
        badge('Within range', 'sev-none', 'severity-badge'));
    } else {
      head.append(el('span', { class: 'headline', text: 'Calcium status not assessed', testid: 'status-headline' }),
        badge('Not assessed', 'sev-info', 'severity-badge'));
    }
    body.append(head);
    body.append(el('p', { class: 'item-text', text: summary, testid: 'status-summary' }));

    // The numbers: value, unit, band and interval.
    const m = /(?:against|within) the (.+?) interval ([0-9.]+\s*-\s*[0-9.]+\s*\S+?)\.?$/.exec(summary);
    const v = /:\s*([A-Za-z][^:]*?)\s([0-9]+(?:\.[0-9]+)?)\s(mmol\/L|mg\/dL)/.exec(summary);
    const grade = /\bGrade (\w+)/.exec((finding && finding.detail) || '') || /, (\w+) grade\b/.exec(summary);
    const big = v
      ? el('span', { class: 'big-number', testid: 'status-value' }, v[2], el('span', { class: 'unit', text: v[3], testid: 'status-unit' }))
      : null;
    body.append(kv([
      ['Result used', v ? el('span', {}, `${v[1][0].toUpperCase()}${v[1].slice(1)} `, big) : null],
      ['Age band', m ? m[1] : null, 'status-band'],
      ['Grade', grade ? grade[1] : null, 'status-grade'],
      ['Reference interval', m ? m[2] : null, 'status-interval'],
      ['Assessment', GUIDANCE_STATUS_WORD[guidance.status] || guidance.status, 'guidance-status'],
      ['Patient', patientLine(ctx.requestIndex) || null, 'status-patient'],
    ], { testid: 'status-numbers' }));

    if (finding) {
      if (finding.detail) body.append(el('p', { class: 'item-text', text: ctx.strip(finding.detail), testid: 'finding-detail' }));
      const ev = ((finding.evidence || [])[0] || {}).detail || [];
      if (ev.length) {
        body.append(el('h4', { text: 'Evidence' }),
          el('ul', { class: 'notes-list', testid: 'finding-evidence' },
            ev.map((r) => el('li', { text: describeReference(r, ctx.requestIndex, ctx.resultIndex) }))));
      }
    }

    if (derived) {
      const arith = (derived.note || []).map((n) => n.text || '').find((t) => t.startsWith('Arithmetic')) || '';
      const caveats = (derived.note || []).map((n) => n.text || '').filter((t) => t && t !== arith && t !== ctx.advisory);
      const rr = (derived.referenceRange || [])[0];
      const box = el('div', { class: 'derived', testid: 'adjusted-calcium' },
        el('h4', { text: 'Calculated albumin-adjusted calcium (an estimate)' }),
        kv([
          ['Value', quantityText(derived.valueQuantity), 'adjusted-value'],
          ['Interpretation', (derived.interpretation || []).map(textOf).join(', ') || null],
          ['Interval', rr ? `${quantityText(rr.low)} to ${quantityText(rr.high)}${rr.text ? ' — ' + rr.text : ''}` : null],
          ['Formula', derived.method ? textOf(derived.method) : null],
          ['From', (derived.derivedFrom || []).map((r) => describeReference(r, ctx.requestIndex, ctx.resultIndex)).join('; ')],
        ]),
        arith ? el('p', { class: 'arith', text: arith, testid: 'adjusted-arithmetic' }) : null,
        caveats.map((t) => el('p', { class: 'item-sub', text: t })));
      body.append(box);
    }

    const cautions = notes.filter((n) => n.startsWith('Caution:') || n.startsWith('Data needed'));
    if (cautions.length) {
      body.append(el('ul', { class: 'notes-list cautions', testid: 'status-cautions' }, cautions.map((t) => el('li', { text: t }))));
    }
    const basis = notes.filter((n) => n.startsWith('Basis:'));
    if (basis.length) {
      body.append(el('details', { class: 'basis', testid: 'status-basis' },
        el('summary', { text: 'Basis: how the status was reached' }),
        basis.map((t) => el('p', { class: 'item-text', text: t }))));
    }
    body.append(advisoryLine(ctx));
  }

  function causeLabel(basis) {
    const m = /^(likely|possible|unlikely|ruled out)\b/i.exec(basis || '');
    return m ? m[1].toLowerCase() : 'other';
  }

  function renderCauses(impression, ctx) {
    const body = clear($('causes-body'));
    if (!impression) {
      body.append(empty('No work-up of causes: it runs only when hypocalcemia is found.', 'causes-empty'));
      return;
    }
    if (impression.summary) body.append(el('p', { class: 'item-text', text: impression.summary, testid: 'causes-summary' }));
    const findings = impression.finding || [];
    const item = (f, n) => {
      const label = causeLabel(f.basis);
      const word = label === 'other' ? 'Unlabelled' : label[0].toUpperCase() + label.slice(1);
      return el('li', { class: `label-${label.replace(' ', '-')}`, testid: 'cause' },
        el('div', { class: 'item-title' },
          el('span', { class: 'rank', text: `${n + 1}.` }),
          badge(word, `label-${label.replace(' ', '-')}`, 'cause-label'),
          el('span', { text: textOf(f.itemCodeableConcept), testid: 'cause-name' })),
        el('p', { class: 'item-text', text: f.basis || '', testid: 'cause-basis' }));
    };
    const open = findings.map((f, n) => [f, n]).filter(([f]) => ['likely', 'possible', 'other'].includes(causeLabel(f.basis)));
    const rest = findings.map((f, n) => [f, n]).filter(([f]) => !['likely', 'possible', 'other'].includes(causeLabel(f.basis)));
    body.append(el('ol', { class: 'item-list', testid: 'causes-open' }, open.map(([f, n]) => item(f, n))));
    if (rest.length) {
      body.append(el('details', { testid: 'causes-rest' },
        el('summary', { text: `Unlikely or ruled out (${rest.length})` }),
        el('ol', { class: 'item-list' }, rest.map(([f, n]) => item(f, n)))));
    }
    const other = (impression.note || []).map((n) => n.text).filter((t) => t && t !== ctx.advisory);
    other.forEach((t) => body.append(el('p', { class: 'item-sub', text: t })));
    body.append(advisoryLine(ctx));
  }

  function renderTests(requests, notes, ctx) {
    const body = clear($('tests-body'));
    const tests = requests.filter((r) => identifierValue(r, SID_TEST) !== null || r.intent === 'proposal');
    if (!tests.length) body.append(empty('No next tests proposed.', 'tests-empty'));
    else {
      body.append(el('ol', { class: 'item-list', testid: 'tests-list' }, tests.map((r, n) => {
        const label = textOf(r.code);
        const reason = ((r.reasonCode || [])[0] || {}).text || '';
        const short = reason.replace(/^Work-up of hypocalcemia:\s*/, '').replace(`${label}: `, '');
        const loinc = ((r.code && r.code.coding) || [])[0];
        return el('li', { class: 'sev-info', testid: 'next-test' },
          el('div', { class: 'item-title' },
            el('span', { class: 'rank', text: `${n + 1}.` }),
            el('span', { text: label }),
            badge(`Draft ${r.intent || 'proposal'}`, 'draft')),
          el('p', { class: 'item-text', text: short }),
          loinc ? el('p', { class: 'item-sub', text: `${loinc.code}${loinc.display ? ' — ' + loinc.display : ''}` }) : null);
      })));
    }
    const held = notes.filter((t) => t.startsWith('Work-up: Held back'));
    held.forEach((t) => body.append(el('p', { class: 'item-sub', text: t.replace(/^Work-up:\s*/, '') })));
    body.append(advisoryLine(ctx));
  }

  function renderTreatment(meds, notes, ctx) {
    const body = clear($('treatment-body'));
    if (!meds.length) body.append(empty('No treatment proposed.', 'treatment-empty'));
    else {
      body.append(el('ol', { class: 'item-list', testid: 'treatment-list' }, meds.map((r, n) => {
        const key = identifierValue(r, SID_TREATMENT);
        const dose = (r.dosageInstruction || [])[0] || {};
        const route = dose.route ? textOf(dose.route) : '';
        const rest = (r.note || []).map((x) => x.text).filter((t) => t && t !== ctx.advisory);
        return el('li', { class: r.priority === 'urgent' || r.priority === 'stat' ? 'sev-high' : 'sev-moderate', testid: 'treatment' },
          el('div', { class: 'item-title' },
            el('span', { class: 'rank', text: `${n + 1}.` }),
            el('span', { text: textOf(r.medicationCodeableConcept) || 'Medication' }),
            badge(`Draft ${r.intent || 'proposal'}`, 'draft'),
            r.priority ? badge(r.priority === 'urgent' ? 'Urgent' : r.priority, r.priority === 'routine' ? 'sev-info' : 'sev-high') : null),
          el('p', { class: 'item-sub', text: [key ? key.replace(/-/g, ' ') : '', route].filter(Boolean).join(' · ') }),
          el('p', { class: 'arith', text: dose.text || '(no dosage text)', testid: 'treatment-arithmetic' }),
          rest.length ? el('details', {}, el('summary', { text: 'Dose sources and product' }),
            rest.map((t) => el('p', { class: 'item-sub', text: t }))) : null);
      })));
    }
    const also = notes.filter((t) => t.startsWith('Treatment:') && !/proposals \(drafts, not orders\)|^Treatment: Safety/.test(t));
    if (also.length) {
      body.append(el('ul', { class: 'notes-list', testid: 'treatment-notes' }, also.map((t) => el('li', { text: t.replace(/^Treatment:\s*/, '') }))));
    }
    body.append(advisoryLine(ctx));
  }

  function renderSafety(issues, ctx) {
    const body = clear($('safety-body'));
    if (!issues.length) {
      body.append(empty('No safety issue was raised.', 'safety-empty'));
      return;
    }
    const sorted = issues
      .map((r, n) => [r, n])
      .sort(([a, i], [b, j]) => (SEVERITY_ORDER[a.severity] ?? 9) - (SEVERITY_ORDER[b.severity] ?? 9) || i - j)
      .map(([r]) => r);
    body.append(el('ul', { class: 'item-list', testid: 'safety-list' }, sorted.map((r) => {
      const key = identifierValue(r, SID_SAFETY);
      return el('li', { class: `sev-${SEVERITY_WORD[r.severity] ? r.severity : 'info'}`, testid: 'safety-issue', 'data-key': key, 'data-severity': r.severity },
        el('div', { class: 'item-title' },
          severityBadge(r.severity, 'safety-severity'),
          el('span', { text: textOf(r.code) || key }),
          el('span', { class: 'item-sub mono', text: key })),
        el('p', { class: 'item-text', text: ctx.strip(r.detail) }),
        (r.mitigation || []).map((m) => el('p', { class: 'item-text' }, el('strong', { text: 'What to do: ' }), textOf(m.action))));
    })));
    body.append(advisoryLine(ctx));
  }

  function renderSetAside(outcomes) {
    const body = clear($('setaside-body'));
    const issues = outcomes.flatMap((o) => o.issue || []);
    if (!issues.length) {
      body.append(empty('The result lists nothing set aside.'));
      return;
    }
    body.append(el('ul', { class: 'item-list', testid: 'setaside-list' }, issues.map((i) => {
      const where = [...(i.expression || []), ...(i.location || [])];
      const sev = i.severity === 'error' || i.severity === 'fatal' ? 'sev-high' : i.severity === 'warning' ? 'sev-moderate' : 'sev-info';
      return el('li', { class: sev, testid: 'setaside-issue' },
        el('div', { class: 'item-title' },
          badge(ISSUE_SEVERITY_WORD[i.severity] || i.severity || 'Issue', sev),
          el('span', { text: i.diagnostics || textOf(i.details) || i.code })),
        where.length ? el('p', { class: 'item-sub' }, 'Element: ', where.map((w, n) => [n ? ', ' : '', el('span', { class: 'element', text: w })])) : null);
    })));
  }

  function renderNotes(notes, advisory) {
    const body = clear($('notes-body'));
    const shown = notes.slice(1).filter((t) =>
      t && t !== advisory && !t.startsWith('Basis:') && !t.startsWith('Caution:') && !t.startsWith('Data needed') && !t.startsWith('Rule set:'));
    if (!shown.length) body.append(empty('No further notes.'));
    else {
      body.append(el('details', {},
        el('summary', { text: `All ${shown.length} notes of the GuidanceResponse (most are shown above)` }),
        el('ul', { class: 'notes-list', testid: 'notes-list' }, shown.map((t) => el('li', { text: t })))));
    }
  }

  const partValue = (p) => {
    if (!p) return '';
    for (const [k, v] of Object.entries(p)) if (k.startsWith('value')) return typeof v === 'object' ? JSON.stringify(v) : String(v);
    return '';
  };
  const parts = (p, name) => (p.part || []).filter((x) => x.name === name);
  const part = (p, name) => partValue(parts(p, name)[0]);

  function renderExplain(explain) {
    const body = clear($('explain-body'));
    const steps = explain ? (explain.parameter || []).filter((p) => p.name === 'step') : [];
    if (!steps.length) {
      body.append(empty(explain
        ? 'The explain trace in this result has no steps.'
        : 'This result has no explain trace (the service may not provide one yet).', 'explain-absent'));
      return;
    }
    const stages = new Map();
    for (const s of steps) {
      const st = part(s, 'stage') || 'other';
      if (!stages.has(st)) stages.set(st, []);
      stages.get(st).push(s);
    }
    const toggle = el('button', { type: 'button', class: 'secondary small', testid: 'explain-toggle', text: 'Open all steps' });
    toggle.addEventListener('click', () => {
      const all = [...body.querySelectorAll('details.stage')];
      const open = !all.every((d) => d.open);
      all.forEach((d) => { d.open = open; });
      toggle.textContent = open ? 'Close all steps' : 'Open all steps';
    });
    body.append(el('p', { class: 'item-sub' }, `${steps.length} step${steps.length === 1 ? '' : 's'} in ${stages.size} stage${stages.size === 1 ? '' : 's'}. `, toggle));
    const order = [...stages.keys()].sort((a, b) => (STAGE_ORDER.indexOf(a) + 1 || 99) - (STAGE_ORDER.indexOf(b) + 1 || 99));
    for (const st of order) {
      const list = stages.get(st);
      const details = el('details', { class: 'stage', testid: 'explain-stage', 'data-stage': st, open: st === 'status' },
        el('summary', {}, el('strong', { text: STAGE_LABEL[st] || st }), ` — ${list.length} step${list.length === 1 ? '' : 's'}`));
      for (const s of list) {
        const inputs = parts(s, 'input').map((i) => {
          const what = part(i, 'what');
          const src = part(i, 'source');
          return el('li', {}, what || '(input)', src ? el('span', { class: 'item-sub' }, ' — ', el('span', { class: 'element', text: src })) : null);
        });
        details.append(el('div', { class: 'step', testid: 'explain-step' },
          el('p', { class: 'question', text: part(s, 'question') || '(no question given)' }),
          kv([
            ['Rule', part(s, 'rule') ? el('span', { class: 'mono', text: part(s, 'rule') }) : null],
            ['Inputs', inputs.length ? el('ul', {}, inputs) : null],
            ['Basis', part(s, 'basis') || null],
            ['Result', part(s, 'result') || null, 'explain-result'],
          ])));
      }
      body.append(details);
    }
  }

  function renderRuleset(guidance, notes, provenance, device, explain) {
    const dl = clear($('ruleset-body'));
    const add = (k, v, testid) => { if (v) dl.append(el('dt', { text: k }), el('dd', { testid }, v)); };
    let name = '', version = '', hash = '';
    const policy = ((provenance && provenance.policy) || [])[0] || '';
    const pm = /\/rules\/([^/]+)\/([^?]+)\?sha256=([0-9a-f]+)/.exec(policy);
    if (pm) [, name, version, hash] = pm;
    const rulesParam = explain && (explain.parameter || []).find((p) => p.name === 'rules');
    if (rulesParam) {
      version = version || part(rulesParam, 'version');
      hash = hash || part(rulesParam, 'hash');
    }
    const label = notes.find((t) => t.startsWith('Rule set:'));
    add('Rule set', name || null, 'ruleset-name');
    add('Version', version || null, 'ruleset-version');
    add('SHA-256', hash ? el('span', { class: 'mono', text: hash }) : null, 'ruleset-hash');
    add('As stated', label ? label.replace(/^Rule set:\s*/, '') : null, 'ruleset-label');
    const dv = device && (device.version || [])[0];
    add('Service version', dv ? dv.value : null, 'service-version');
    add('Evaluated at', guidance ? guidance.occurrenceDateTime : null);
    if (!dl.firstChild) dl.append(el('dt', { text: 'Rule set' }), el('dd', { text: 'not stated in the result' }));
  }

  // ---- download ----------------------------------------------------------

  function download() {
    if (!lastResultText) return;
    const blob = new Blob([lastResultText], { type: FHIR_JSON });
    const url = URL.createObjectURL(blob);
    const a = el('a', { href: url, download: 'result-bundle.json', class: 'hidden' });
    document.body.append(a);
    a.click();
    a.remove();
    setTimeout(() => URL.revokeObjectURL(url), 1000);
  }

  // ---- wiring ------------------------------------------------------------

  function init() {
    $('assess').addEventListener('click', assess);
    $('clear').addEventListener('click', () => {
      $('request-json').value = '';
      $('request-file').value = '';
      setStatus($('request-status'), '', false);
    });
    $('request-file').addEventListener('change', loadFile);
    $('scenario-select').addEventListener('change', showScenarioSummary);
    $('make-bundle').addEventListener('click', makeBundle);
    $('download-bundle').addEventListener('click', download);
    $('request-json').addEventListener('keydown', (e) => {
      if (e.key === 'Enter' && (e.ctrlKey || e.metaKey)) assess();
    });
    document.body.setAttribute('data-state', 'ready');
    loadScenarios();
  }

  if (document.readyState === 'loading') document.addEventListener('DOMContentLoaded', init);
  else init();
})();
