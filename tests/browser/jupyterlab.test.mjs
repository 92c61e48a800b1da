// Headroom in JupyterLab, in headless Chromium, as a person would use it.
// Started by tests/browser/run, which sets up JupyterLab and passes, in the environment:
//   JUPYTER_URL, JUPYTER_TOKEN   the running server (127.0.0.1) and its temporary token
//   NOTEBOOK_ROOT                the server's root folder (a throwaway copy of notebooks/)
//   ARTIFACTS                    where screenshots go
//   BROWSER_PID_FILE             where Chromium's pid is written, for the runner's cleanup
//   CHROMIUM                     the browser binary (Debian's chromium)
// Steps: (1) an example worksheet, run all; (2) a live update of a block above the edited
// `given`; (3) a unit mistake and its caret excerpt; (4) completion and inspection.
// Closes with "N passed, M failed".
import { chromium } from 'playwright-core';
import fs from 'node:fs';
import path from 'node:path';

const env = process.env;
const BASE = env.JUPYTER_URL;
const TOKEN = env.JUPYTER_TOKEN;
const ROOT = env.NOTEBOOK_ROOT;
const ART = env.ARTIFACTS;
// A kernel run of a cell takes milliseconds; these bounds only catch a hang.
const CELL_TIMEOUT = 30_000;
const PAGE_TIMEOUT = 90_000;
const WHOLE_RUN = 420_000;

const results = [];
function check(name, ok, detail = '') {
  results.push({ name, ok });
  console.log(`${ok ? 'ok  ' : 'FAIL'}  ${name}${!ok && detail ? `\n        ${detail}` : ''}`);
  return ok;
}
function short(e) {
  return String(e && e.message ? e.message : e).split('\n').slice(0, 4).join(' | ');
}
function summary() {
  const passed = results.filter((r) => r.ok).length;
  const failed = results.length - passed;
  const names = results.filter((r) => !r.ok).map((r) => r.name);
  if (names.length) console.log(`failed checks:\n  ${names.join('\n  ')}`);
  console.log(`${passed} passed, ${failed} failed`);
  return failed;
}

// ---------------------------------------------------------------- the notebook under test

const SCRATCH = 'browser-example.ipynb';

// The worksheet opened in step 1 when notebooks/ holds no example with a `given` and a sweep.
function scratchNotebook() {
  const code = (source) => ({
    cell_type: 'code', execution_count: null, metadata: {}, outputs: [], source,
  });
  return {
    nbformat: 4,
    nbformat_minor: 5,
    metadata: {
      kernelspec: { name: 'headroom', display_name: 'Headroom', language: 'headroom' },
      language_info: { name: 'headroom' },
    },
    cells: [
      { cell_type: 'markdown', metadata: {}, source: '# 5 V logic rail\nA linear regulator from a 12 V adapter.' },
      code('given vin   = 10.8 V .. 13.2 V   "adapter, ±10 %"\ngiven iload = 180 mA ± 20 %      "logic + backlight"\ngiven ta    = 50 °C              "closed enclosure"'),
      code('u1 = reg.linear(vin, vout: 5 V, iout: iload, iq: 4 mA, dropout: 2 V)\nθ  = 6 K/W + 0.4 K/W + (22 K/W || 60 K/W)\ntj [°C] = heat.junction(u1.loss, ambient: ta, theta: θ, tj_max: 125 °C)\ncheck tj <= 125 °C "silicon limit"\ncheck u1.headroom >= 0 V "out of dropout"'),
      code('sweep iload over 50 mA .. 300 mA steps 26: tj, u1.loss'),
    ].map((c, i) => ({ ...c, id: `cell-${i}` })),
  };
}

function sourceOf(cell) {
  return Array.isArray(cell.source) ? cell.source.join('') : cell.source;
}

// An example from notebooks/ with a `given` and a sweep, else our own; opened without its
// saved outputs, so that everything seen on the page comes from this run.
function prepareExample() {
  const candidates = fs.readdirSync(ROOT).filter((f) => f.endsWith('.ipynb')).sort();
  let chosen = null;
  for (const f of candidates) {
    try {
      const nb = JSON.parse(fs.readFileSync(path.join(ROOT, f), 'utf8'));
      const code = nb.cells.filter((c) => c.cell_type === 'code').map(sourceOf).join('\n');
      if (/^\s*given\s/m.test(code) && /^\s*sweep\s/m.test(code)) {
        chosen = f;
        break;
      }
    } catch {
      // Not a notebook we can read: not a candidate.
    }
  }
  if (!chosen) {
    chosen = SCRATCH;
    fs.writeFileSync(path.join(ROOT, chosen), JSON.stringify(scratchNotebook(), null, 1));
  }
  const file = path.join(ROOT, chosen);
  const nb = JSON.parse(fs.readFileSync(file, 'utf8'));
  for (const c of nb.cells) {
    if (c.cell_type === 'code') {
      c.outputs = [];
      c.execution_count = null;
    }
  }
  fs.writeFileSync(file, JSON.stringify(nb, null, 1));
  const codeCells = nb.cells.filter((c) => c.cell_type === 'code').length;
  return { name: chosen, codeCells, edit: givenToEdit(nb) };
}

// The first `given NAME = NUMBER UNIT` (a single value, optionally with a ± tolerance) of the
// notebook, and the same cell with that number made 25 % larger.
function givenToEdit(nb) {
  const line = /^(\s*given\s+[^\s=\[]+\s*(?:\[[^\]]*\])?\s*=\s*)(\d+(?:\.\d+)?)(\s*[^\s.±"]+\s*(?:±[^"]*)?(?:"[^"]*")?\s*)$/;
  for (let i = 0; i < nb.cells.length; i += 1) {
    const c = nb.cells[i];
    if (c.cell_type !== 'code') continue;
    const lines = sourceOf(c).split('\n');
    for (let j = 0; j < lines.length; j += 1) {
      const m = lines[j].match(line);
      if (!m) continue;
      const edited = [...lines];
      edited[j] = `${m[1]}${Number((Number(m[2]) * 1.25).toPrecision(6))}${m[3]}`;
      return { cell: i, before: lines[j].trim(), after: edited[j].trim(), source: edited.join('\n') };
    }
  }
  return null;
}

// ---------------------------------------------------------------- page helpers

let shot = 0;
async function screenshot(page, name) {
  shot += 1;
  const file = path.join(ART, `${String(shot).padStart(2, '0')}-${name}.png`);
  try {
    await page.screenshot({ path: file });
  } catch (e) {
    console.log(`        (no screenshot ${name}: ${short(e)})`);
  }
}

function notebook(page) {
  return page.locator('.jp-NotebookPanel:not(.lm-mod-hidden)').last();
}

// Waits for the Headroom kernel to be the notebook's kernel and idle; answers a kernel
// picker dialog with Headroom when JupyterLab asks.
async function headroomKernel(page, nb) {
  const deadline = Date.now() + PAGE_TIMEOUT;
  while (Date.now() < deadline) {
    const dialog = page.locator('.jp-Dialog');
    if (await dialog.count()) {
      const select = dialog.locator('select');
      if (await select.count()) await select.selectOption({ label: 'Headroom' });
      await dialog.getByRole('button', { name: 'Select' }).click();
    }
    const kernelName = (await nb.locator('.jp-KernelName').textContent().catch(() => '')) || '';
    const status = await nb
      .locator('.jp-Notebook-ExecutionIndicator')
      .getAttribute('data-status')
      .catch(() => null);
    if (kernelName.trim() === 'Headroom' && status === 'idle') return true;
    await page.waitForTimeout(250);
  }
  throw new Error('the Headroom kernel did not become idle in the notebook');
}

async function menu(page, top, item) {
  await page.locator('.lm-MenuBar-itemLabel', { hasText: new RegExp(`^${top}$`) }).click();
  await page
    .locator('.lm-Menu:not(.lm-MenuBar) .lm-Menu-itemLabel', { hasText: new RegExp(`^${item}$`) })
    .first()
    .click();
}

// Every code cell shows an execution count ("[3]:"), none a "[*]:" — the run has finished.
async function waitForRun(page, nb, timeout = CELL_TIMEOUT * 4) {
  await nb.locator('.jp-CodeCell').first().waitFor();
  await page.waitForFunction(
    (panel) => {
      const prompts = [...panel.querySelectorAll('.jp-CodeCell .jp-InputPrompt')];
      return prompts.length > 0 && prompts.every((p) => /\[\d+\]/.test(p.textContent));
    },
    await nb.elementHandle(),
    { timeout },
  );
}

function cell(nb, i) {
  return nb.locator('.jp-Notebook .jp-Cell').nth(i);
}

// Replaces the text of a cell's editor, as typed (insertText skips CodeMirror's bracket
// auto-closing, which would otherwise double the closing brackets we type).
async function setSource(page, c, text) {
  await c.locator('.cm-content').click();
  await page.keyboard.press('Control+a');
  await page.keyboard.insertText(text);
}

async function runOnly(page, c) {
  await c.locator('.cm-content').click();
  await page.keyboard.press('Control+Enter');
}

// Appends a cell at the end of the notebook and returns a locator fixed to its position.
async function appendCell(page, nb) {
  const cells = nb.locator('.jp-Notebook .jp-Cell');
  const n = await cells.count();
  await cells.nth(n - 1).locator('.jp-InputPrompt').click();
  await page.keyboard.press('Escape');
  await page.keyboard.press('b');
  await cells.nth(n).waitFor();
  return cells.nth(n);
}

async function executionCount(c) {
  const prompt = c.locator('.jp-InputPrompt');
  if ((await prompt.count()) === 0) return null;
  const t = (await prompt.textContent()) || '';
  const m = t.match(/\[(\d+)\]/);
  return m ? Number(m[1]) : null;
}

// The output as read on the page, table cells and line breaks folded to single spaces.
async function outputText(c) {
  // Markdown cells have no output area: do not wait for one.
  const area = c.locator('.jp-OutputArea');
  if ((await area.count()) === 0) return '';
  const t = (await area.innerText().catch(() => '')) || '';
  return t.replace(/\s+/g, ' ').trim();
}

// Error outputs (JupyterLab renders a kernel's error reply with the stderr MIME type; warnings
// on stderr do not start with "error").
function errorOutputs(scope) {
  return scope
    .locator('.jp-OutputArea-output[data-mime-type="application/vnd.jupyter.stderr"]')
    .filter({ hasText: /^\s*error/ });
}

// Polls until the cell's output satisfies `ok`; returns the last text seen.
async function waitForOutput(page, c, ok, timeout = CELL_TIMEOUT) {
  const deadline = Date.now() + timeout;
  let text = '';
  while (Date.now() < deadline) {
    text = await outputText(c);
    if (ok(text)) return text;
    await page.waitForTimeout(200);
  }
  return text;
}

// ---------------------------------------------------------------- the steps

async function stepRunAll(page, example) {
  await page.goto(`${BASE}/lab/tree/${encodeURIComponent(example.name)}?reset&token=${TOKEN}`, {
    timeout: PAGE_TIMEOUT,
  });
  const nb = notebook(page);
  await nb.waitFor({ timeout: PAGE_TIMEOUT });
  await headroomKernel(page, nb);
  check('1 the example notebook opens on the Headroom kernel', true);
  check(
    '1 the notebook opens without outputs (what follows comes from this run)',
    (await nb.locator('.jp-OutputArea-output').count()) === 0,
  );

  await menu(page, 'Run', 'Run All Cells');
  await waitForRun(page, nb);
  const prompts = await nb.locator('.jp-CodeCell .jp-InputPrompt').allTextContents();
  check(
    `1 run all: every one of the ${example.codeCells} code cells ran`,
    prompts.length === example.codeCells && prompts.every((p) => /\[\d+\]/.test(p)),
    prompts.join(' '),
  );

  const outputs = nb.locator('.jp-OutputArea-output');
  const tables = outputs.locator('table');
  await tables.first().waitFor({ timeout: CELL_TIMEOUT }).catch(() => {});
  const tableCount = await tables.count();
  const headers = (await outputs.locator('table th').allTextContents()).map((t) => t.trim());
  check(
    '1 result tables are shown (Inputs, Values and Checks sections)',
    tableCount >= 2 && ['Inputs', 'Values', 'Checks'].every((h) => headers.includes(h)),
    `${tableCount} tables; headers: ${[...new Set(headers)].join(', ')}`,
  );
  // Every input row shows a value with a unit and its worst-case range ("… ").
  const inputRange = await outputs
    .locator('table tr', { hasText: /\d/ })
    .filter({ hasText: '…' })
    .count();
  check('1 values are shown with their worst-case ranges', inputRange >= 2, `${inputRange} rows with a range`);
  const passes = await outputs.getByText('✓ pass').count();
  check('1 check marks are shown', passes >= 1, `${passes} passing checks`);
  const chart = outputs.locator('img, svg');
  await chart.first().waitFor({ timeout: 5_000 }).catch(() => {});
  const charts = await chart.count();
  check(
    '1 a sweep chart is shown (an <img> or <svg> in an output)',
    charts >= 1,
    'no image in any output: the kernel sends no chart for `sweep` yet',
  );
  const errors = await errorOutputs(nb).count();
  check('1 the example runs without errors', errors === 0, `${errors} error outputs`);
  await screenshot(page, 'example-run-all');
  await worksheetViews(page);
}

// In the example: a `given` made 25 % larger and only its cell re-run; some other cell's
// block changes while its execution count stays.
async function stepExampleGiven(page, example) {
  if (!example.edit) throw new Error(`no single-valued \`given\` in ${example.name} to edit`);
  const nb = notebook(page);
  const cells = nb.locator('.jp-Notebook .jp-Cell');
  const n = await cells.count();
  const before = [];
  for (let i = 0; i < n; i += 1) {
    before.push({ text: await outputText(cells.nth(i)), count: await executionCount(cells.nth(i)) });
  }
  const c = cells.nth(example.edit.cell);
  console.log(`        editing \`${example.edit.before}\` to \`${example.edit.after}\``);
  await setSource(page, c, example.edit.source);
  await runOnly(page, c);
  const deadline = Date.now() + CELL_TIMEOUT;
  let changed = [];
  while (Date.now() < deadline) {
    changed = [];
    for (let i = 0; i < n; i += 1) {
      if (i === example.edit.cell || before[i].count === null) continue;
      const text = await outputText(cells.nth(i));
      if (text !== before[i].text) changed.push({ i, same: (await executionCount(cells.nth(i))) === before[i].count });
    }
    if (changed.length) break;
    await page.waitForTimeout(250);
  }
  check(
    `2 example: after re-running only the edited \`given\`, a dependent block elsewhere updates`,
    changed.length >= 1,
    'no other block changed: the kernel\'s live updates (update_display_data) did not arrive',
  );
  check(
    '2 example: the updated blocks were not re-run (their execution counts are unchanged)',
    changed.length >= 1 && changed.every((x) => x.same),
    JSON.stringify(changed),
  );
  await screenshot(page, 'example-given-edited');
}

// Clean views of the example's worksheet for the README, without the side bar: the first
// block with checks, and the sweep chart, each with the text cell above it at the top.
async function worksheetViews(page) {
  const nb = notebook(page);
  await page.keyboard.press('Escape');
  await page.keyboard.press('Control+b');
  await page.waitForTimeout(500);
  const cells = nb.locator('.jp-Notebook .jp-Cell');
  const n = await cells.count();
  const views = [
    ['worksheet', async (c) => (await outputText(c)).includes('Checks')],
    ['worksheet-sweep', async (c) => (await c.locator('.jp-OutputArea-output img, .jp-OutputArea-output svg').count()) > 0],
  ];
  for (const [name, wanted] of views) {
    for (let i = 0; i < n; i += 1) {
      if (await wanted(cells.nth(i))) {
        await cells.nth(i > 0 ? i - 1 : i).evaluate((el) => el.scrollIntoView({ block: 'start' }));
        await page.waitForTimeout(300);
        await screenshot(page, name);
        break;
      }
    }
  }
  await page.keyboard.press('Control+b');
}

// A new notebook from the launcher's Headroom card; returns its panel.
async function newHeadroomNotebook(page) {
  await menu(page, 'File', 'New Launcher');
  const card = page.locator('.jp-Launcher-section', { hasText: 'Notebook' })
    .locator('.jp-LauncherCard', { hasText: 'Headroom' });
  await card.first().click({ timeout: PAGE_TIMEOUT });
  const nb = notebook(page);
  await nb.waitFor();
  await headroomKernel(page, nb);
  return nb;
}

async function stepLiveUpdate(page, state) {
  const nb = await newHeadroomNotebook(page);
  state.nb = nb;
  check('2 the launcher has a Headroom notebook card that starts the kernel', true);
  // The dependent cell stands above the `given` it reads.
  const dependent = cell(nb, 0);
  await setSource(page, dependent, 'p = iload * 5 V\ncheck p <= 1.2 W "within the budget"');
  const givenCell = await appendCell(page, nb);
  await setSource(page, givenCell, 'given iload = 180 mA ± 20 %');
  await runOnly(page, givenCell);
  await waitForOutput(page, givenCell, (t) => t.includes('iload'));
  await runOnly(page, dependent);
  // 180 mA × 5 V = 0.900 W nominal; ±20 % gives 144 mA … 216 mA, so 0.720 W … 1.08 W.
  // The check's margin at the worst case: 1.20 W − 1.08 W = +120 mW.
  const before = await waitForOutput(page, dependent, (t) => t.includes('900 mW'));
  check(
    '2 the dependent block shows p = 900 mW, 720 mW … 1.08 W, passing by +120 mW',
    before.includes('900 mW') && /720 mW\s*…\s*1\.08 W/.test(before) && before.includes('✓ pass')
      && before.includes('+120 mW'),
    JSON.stringify(before),
  );
  const countBefore = await executionCount(dependent);
  await screenshot(page, 'live-update-before');

  await setSource(page, givenCell, 'given iload = 250 mA ± 20 %');
  await runOnly(page, givenCell);
  await waitForOutput(page, givenCell, (t) => t.includes('250 mA'));
  // 250 mA × 5 V = 1.25 W nominal; 200 mA … 300 mA gives 1.00 W … 1.50 W, which breaks the
  // 1.2 W limit by 300 mW at the worst case.
  const after = await waitForOutput(page, dependent, (t) => t.includes('1.25 W'));
  check(
    '2 after re-running only the `given` below, the block above shows p = 1.25 W (1.00 W … 1.50 W)',
    after.includes('1.25 W') && /1\.00 W\s*…\s*1\.50 W/.test(after) && !after.includes('900 mW'),
    `live updates (update_display_data) did not reach the block: ${JSON.stringify(after)}`,
  );
  check(
    '2 the updated check turns to ✗ FAIL with margin −300 mW',
    after.includes('✗ FAIL') && /[-−]300 mW/.test(after),
    JSON.stringify(after),
  );
  check(
    '2 the block above was updated in place, not re-run (its execution count is unchanged)',
    countBefore !== null && (await executionCount(dependent)) === countBefore,
  );
  await screenshot(page, 'live-update-after');
}

async function stepUnitError(page, nb) {
  const c = await appendCell(page, nb);
  // A typo a person makes: mV where mA was meant, so the product is not a power.
  const line = 'pr [W] = 5 V * 20 mV';
  const span = '5 V * 20 mV';
  await setSource(page, c, line);
  await runOnly(page, c);
  const text = await waitForOutput(page, c, (t) => t.includes('DimensionMismatch'));
  const raw = (await c.locator('.jp-OutputArea').innerText().catch(() => '')) || '';
  check('3 the unit mistake is reported as DimensionMismatch', text.includes('DimensionMismatch'), JSON.stringify(text));
  // The same selector that finds no error in the example finds this one.
  check('3 it is shown as an error output', (await errorOutputs(c).count()) === 1);
  check(
    '3 the message names the declared unit and its dimension',
    text.includes('declared as `W`') && text.includes('power'),
    JSON.stringify(text),
  );
  // The caret excerpt: the source line, and under it one caret per character of the span.
  const lines = raw.split('\n');
  const at = lines.findIndex((l) => l.includes(line));
  let caretOk = false;
  let caretDetail = 'no source line in the excerpt';
  if (at >= 0 && at + 1 < lines.length) {
    const src = lines[at];
    const carets = lines[at + 1];
    const col = src.indexOf(span);
    const first = carets.indexOf('^');
    const count = (carets.match(/\^/g) || []).length;
    caretOk = first === col && count === span.length;
    caretDetail = `caret at ${first} (want ${col}), ${count} carets (want ${span.length}): ${JSON.stringify(carets)}`;
  }
  check('3 the caret excerpt underlines exactly `5 V * 20 mV`', caretOk, caretDetail);
  await screenshot(page, 'unit-error');
}

async function stepCompleteInspect(page, nb) {
  const c = await appendCell(page, nb);
  await setSource(page, c, 'u = reg.');
  await page.waitForTimeout(300);
  await page.keyboard.press('Tab');
  const completer = page.locator('.jp-Completer:not(.lm-mod-hidden)');
  const wanted = (list) => ['linear', 'switching'].every((w) => list.some((t) => t.startsWith(w)));
  let items = [];
  const deadline = Date.now() + CELL_TIMEOUT;
  while (Date.now() < deadline) {
    if (await completer.isVisible()) {
      items = (await completer.locator('.jp-Completer-item').allInnerTexts()).map((t) => t.trim());
      if (wanted(items)) break;
    }
    await page.waitForTimeout(200);
  }
  // The reg. namespace of the built-in library holds the linear and switching regulators.
  check(
    '4 Tab after `reg.` offers the regulator built-ins (linear, switching)',
    wanted(items),
    `completer items: ${JSON.stringify(items)}`,
  );
  await screenshot(page, 'completion');
  await page.keyboard.press('Escape');

  await setSource(page, c, 'u = reg.linear');
  await page.waitForTimeout(300);
  await page.keyboard.press('Shift+Tab');
  const tooltip = page.locator('.jp-Tooltip:not(.lm-mod-hidden)');
  await tooltip.waitFor({ state: 'visible', timeout: CELL_TIMEOUT }).catch(() => {});
  const help = (await tooltip.innerText().catch(() => '')) || '';
  // Its documentation: the signature with its arguments, and what the part is.
  check(
    '4 Shift+Tab on `reg.linear` shows its signature and documentation',
    /reg\.linear\s*\(\s*vin,\s*vout,\s*iout/.test(help) && /linear regulator/i.test(help),
    `tooltip: ${JSON.stringify(help.slice(0, 300))}`,
  );
  await screenshot(page, 'inspection');
  await page.keyboard.press('Escape');
}

// ---------------------------------------------------------------- main

async function main() {
  const example = prepareExample();
  console.log(`example notebook: ${example.name} (${example.codeCells} code cells)`);
  // A browser server, so that its pid is known: the runner kills its process group if this
  // script is itself killed. Playwright gives every launch a fresh, empty profile
  // (--user-data-dir) of its own.
  const server = await chromium.launchServer({
    executablePath: env.CHROMIUM || '/usr/bin/chromium',
    headless: true,
    args: [
      '--headless', '--no-sandbox', '--disable-gpu', '--disable-quic', '--no-first-run',
      '--disable-background-networking', '--disable-component-update', '--disable-sync',
    ],
  });
  if (env.BROWSER_PID_FILE) fs.writeFileSync(env.BROWSER_PID_FILE, String(server.process().pid));
  const browser = await chromium.connect(server.wsEndpoint());
  // The scratch notebook that step 2 opens and steps 3 and 4 go on in.
  const state = { nb: null };
  try {
    const context = await browser.newContext({ viewport: { width: 1400, height: 900 } });
    const page = await context.newPage();
    page.setDefaultTimeout(CELL_TIMEOUT);
    const steps = [
      ['1 run all in the example notebook', () => stepRunAll(page, example)],
      ['2 live update in the example', () => stepExampleGiven(page, example)],
      ['2 live update of a block above', () => stepLiveUpdate(page, state)],
      ['3 unit error with its caret', () => stepUnitError(page, state.nb)],
      ['4 completion and inspection', () => stepCompleteInspect(page, state.nb)],
    ];
    for (const [name, run] of steps) {
      const t0 = Date.now();
      console.log(`== ${name}`);
      try {
        if ((name.startsWith('3') || name.startsWith('4')) && !state.nb) {
          throw new Error('no scratch notebook (step 2 did not open one)');
        }
        await run();
      } catch (e) {
        check(`${name}: the step ran to its end`, false, short(e));
        await screenshot(page, `failed-step-${name.split(' ')[0]}`);
      }
      console.log(`   (${((Date.now() - t0) / 1000).toFixed(1)} s)`);
    }
  } finally {
    await browser.close().catch(() => {});
    await server.close().catch(() => {});
  }
}

const watchdog = setTimeout(() => {
  check('the whole browser run finished in time', false, `over ${WHOLE_RUN / 1000} s`);
  summary();
  process.exit(1);
}, WHOLE_RUN);

main()
  .catch((e) => check('the browser test started', false, short(e)))
  .finally(() => {
    clearTimeout(watchdog);
    process.exitCode = summary() === 0 ? 0 : 1;
  });
