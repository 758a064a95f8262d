// End-to-end check of the live dashboard in a real browser (Debian's chromium, driven by
// playwright-core): start `plumbline demo`, open the page, and check that
//   1. the charts receive new rows and points as the demo runs,
//   2. an alert the demo raises appears on the page with the same rule name and raise time
//      as the alert journal, and is later shown cleared, as the journal says,
//   3. the roles the demo publishes are shown live in the topic table, and the page says
//      when its stream is lost,
// and save screenshots at two window sizes under target/browser/.
// Each passed check prints `browser-check: <name>: ok` (CI counts them); a failure exits 1.
//
// Usage: node tests/browser/dashboard.mjs [path/to/plumbline]   (default target/debug/plumbline)
import { spawn } from "node:child_process";
import { mkdirSync, readFileSync, existsSync, writeFileSync } from "node:fs";
import { createServer } from "node:net";
import path from "node:path";
import { fileURLToPath } from "node:url";
import { chromium } from "playwright-core";

const root = path.resolve(path.dirname(fileURLToPath(import.meta.url)), "..", "..");
const bin = path.resolve(process.argv[2] || path.join(root, "target", "debug", "plumbline"));
const out = path.join(root, "target", "browser");
mkdirSync(out, { recursive: true });
const journal = path.join(out, "demo-alerts.jsonl");
const browserPath = process.env.CHROMIUM || "/usr/bin/chromium";
// The demo's alert warnings go to the journal; keep its log to errors.
const env = { ...process.env, PLUMBLINE_LOG: process.env.PLUMBLINE_LOG || "error" };

function freePort() {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.listen(0, "127.0.0.1", () => {
      const p = s.address().port;
      s.close(() => resolve(p));
    });
    s.on("error", reject);
  });
}

const sleep = (ms) => new Promise((r) => setTimeout(r, ms));

async function until(what, seconds, f) {
  const t0 = Date.now();
  while (Date.now() - t0 < seconds * 1000) {
    const v = await f();
    if (v) return v;
    await sleep(200);
  }
  throw new Error(`timed out after ${seconds} s waiting for ${what}`);
}

function readJournal() {
  if (!existsSync(journal)) return [];
  return readFileSync(journal, "utf8").split("\n").filter((l) => l.trim()).map((l) => JSON.parse(l));
}

let demo, browser, failed = false;
function ok(name) { console.log(`browser-check: ${name}: ok`); }

try {
  if (!existsSync(bin)) throw new Error(`no plumbline binary at ${bin} (cargo build first)`);
  if (existsSync(journal)) (await import("node:fs")).unlinkSync(journal);
  const [http, zport] = [await freePort(), await freePort()];
  demo = spawn(bin, [
    "--set", `http.listen=127.0.0.1:${http}`,
    "demo", "--duration", "90", "--journal", journal,
    "--listen", `tcp/127.0.0.1:${zport}`, "--no-multicast",
  ], { cwd: root, env, stdio: ["ignore", "pipe", "inherit"] });
  let printed = "";
  demo.stdout.on("data", (d) => { printed += d.toString(); });
  const url = await until("the demo to print its dashboard URL", 30, () => {
    const m = printed.match(/dashboard at (http:\/\/\S+\/)/);
    return m && m[1];
  });
  if (!url.includes(`:${http}/`)) throw new Error(`printed URL ${url} is not on port ${http}`);

  browser = await chromium.launch({
    executablePath: browserPath,
    headless: true,
    args: ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
      "--disable-background-networking", "--disable-component-update", "--disable-sync"],
  });
  const page = await browser.newPage({ viewport: { width: 1366, height: 900 } });
  const pageErrors = [];
  page.on("pageerror", (e) => pageErrors.push(String(e)));
  await page.goto(url);
  await page.waitForSelector("#chart-gospa", { timeout: 15000 });

  // 1. Charts receive new rows and points.
  const chartState = () => page.evaluate(() => Object.fromEntries(
    [...document.querySelectorAll(".chart")].map((c) => [c.id, { rows: +c.dataset.rows, points: +c.dataset.points }])));
  const first = await until("points on the GOSPA and ego charts", 20, async () => {
    const s = await chartState();
    return s["chart-gospa"]?.points > 0 && s["chart-ego"]?.points > 0 && s;
  });
  await sleep(3000);
  const second = await chartState();
  for (const id of ["chart-gospa", "chart-ego", "chart-clearance", "chart-latency"]) {
    if (!(second[id].rows > first[id].rows && second[id].points > first[id].points)) {
      throw new Error(`${id} did not grow: ${JSON.stringify(first[id])} -> ${JSON.stringify(second[id])}`);
    }
  }
  const drawn = await page.locator("#chart-gospa path[data-line='gospa']").getAttribute("d");
  if (!drawn || drawn.split("L").length < 4) throw new Error("the GOSPA line has fewer than 4 points");
  ok(`charts grow (gospa rows ${first["chart-gospa"].rows} -> ${second["chart-gospa"].rows})`);
  await page.screenshot({ path: path.join(out, "dashboard-wide.png"), fullPage: true });

  // 2. An alert raised by the demo appears with the journal's rule name and time.
  // Rule, time and text are read from one element in one step: the list re-renders
  // between separate reads, and a newer alert could take the first place in between.
  const shown = await until("an active alert on the page", 45, () => page.evaluate(() => {
    const li = document.querySelector("#alerts-active li[data-rule]");
    return li && { rule: li.dataset.rule, t: Number(li.dataset.raisedT), text: li.innerText };
  }));
  await page.screenshot({ path: path.join(out, "dashboard-alert-wide.png"), fullPage: true });
  const raised = await until(`the journal to hold ${shown.rule} raised at ${shown.t}`, 5, () =>
    readJournal().find((e) => e.kind === "raised" && e.rule === shown.rule && e.t === shown.t));
  if (!shown.text.includes(shown.rule)) throw new Error(`the alert text lacks its rule name: ${shown.text}`);
  ok(`alert ${raised.rule} raised at ${raised.t} as in the journal`);

  // ... and is shown cleared when the journal says it cleared.
  const cleared = await until(`${shown.rule} to clear in the journal`, 60, () =>
    readJournal().find((e) => e.kind === "cleared" && e.rule === shown.rule && e.t >= shown.t));
  await until(`${shown.rule} cleared on the page`, 5, async () => {
    const ev = page.locator(`#alerts-recent li[data-rule="${shown.rule}"][data-kind="cleared"][data-t="${cleared.t}"]`);
    const still = page.locator(`#alerts-active li[data-rule="${shown.rule}"][data-raised-t="${shown.t}"]`);
    return (await ev.count()) > 0 && (await still.count()) === 0;
  });
  ok(`alert ${cleared.rule} cleared at ${cleared.t} as in the journal`);

  // 3. Topic health: every role the demo publishes is live, with a rate.
  const topics = await page.evaluate(() => [...document.querySelectorAll("#topics tbody tr")]
    .map((r) => ({ role: r.dataset.role, state: r.dataset.state })));
  const live = topics.filter((t) => t.state === "ok").map((t) => t.role);
  for (const r of ["reference/objects", "estimate/objects", "reference/ego", "estimate/ego"]) {
    if (!live.includes(r)) throw new Error(`role ${r} not shown live: ${JSON.stringify(topics)}`);
  }
  ok(`topic health shows ${live.length} live roles`);

  // Narrow window (a phone or a half-screen laptop): nothing wider than the viewport.
  await page.setViewportSize({ width: 420, height: 900 });
  await sleep(700);
  const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
  await page.screenshot({ path: path.join(out, "dashboard-narrow.png"), fullPage: true });
  if (overflow > 1) throw new Error(`the page is ${overflow} px wider than a 420 px window`);
  ok("narrow window without horizontal overflow");

  // The monitor goes away: the page says its stream is lost instead of showing old numbers.
  const exited = new Promise((r) => demo.once("exit", (code) => r(code)));
  demo.kill("SIGTERM");
  const code = await Promise.race([exited, sleep(20000).then(() => "timeout")]);
  if (code !== 0) throw new Error(`demo exit after SIGTERM: ${code}`);
  await until("the page to report the lost stream", 15, async () =>
    (await page.locator("#link").getAttribute("data-state")) === "lost");
  ok("the page says when its stream is lost");
  if (pageErrors.length) throw new Error("page errors: " + pageErrors.join("; "));

  // 4. With a token file, the page asks for the token, and streams once it has it.
  const tokenFile = path.join(out, "token");
  writeFileSync(tokenFile, "field-day-7Qx\n", { mode: 0o600 });
  const [http2, zport2] = [await freePort(), await freePort()];
  demo = spawn(bin, [
    "--set", `http.listen=127.0.0.1:${http2}`, "--set", `http.token_file=${tokenFile}`,
    "demo", "--duration", "40", "--listen", `tcp/127.0.0.1:${zport2}`, "--no-multicast",
  ], { cwd: root, env, stdio: ["ignore", "ignore", "inherit"] });
  const page2 = await browser.newPage({ viewport: { width: 1366, height: 900 } });
  await until("the second demo to serve", 30, async () => {
    try { return (await fetch(`http://127.0.0.1:${http2}/healthz`)).ok; } catch { return false; }
  });
  const denied = await fetch(`http://127.0.0.1:${http2}/api/snapshot`);
  if (denied.status !== 401) throw new Error(`snapshot without a token: HTTP ${denied.status}`);
  await page2.goto(`http://127.0.0.1:${http2}/`);
  await page2.waitForSelector("#token-form:not([hidden])", { timeout: 10000 });
  await page2.fill("#token", "field-day-7Qx");
  await page2.click("#token-form button");
  await until("the stream after the token", 20, async () =>
    (await page2.locator("#link").getAttribute("data-state")) === "live" &&
    +(await page2.locator("#chart-gospa").getAttribute("data-rows") || 0) > 0);
  ok("with a token file the page asks for the token and then streams");
  await page2.close();

  // 5. A stack that goes quiet: a watcher fed 3 s of the shipped log, then nothing. Its
  // roles and tiles must turn stale (after [dashboard] stale_after, 2 s), and the header,
  // while the page still streams, must say the input is stale rather than "streaming".
  const short = path.join(out, "short.jsonl");
  writeFileSync(short, readFileSync(path.join(root, "replay-logs", "campus-loop.jsonl"), "utf8")
    .split("\n").slice(0, 400).join("\n") + "\n");
  const [http3, zport3] = [await freePort(), await freePort()];
  demo = spawn(bin, [
    "--set", `http.listen=127.0.0.1:${http3}`, "watch", "--duration", "40",
    "--listen", `tcp/127.0.0.1:${zport3}`, "--no-multicast",
  ], { cwd: root, env, stdio: ["ignore", "ignore", "inherit"] });
  await until("the watcher to be ready", 30, async () => {
    try { return (await fetch(`http://127.0.0.1:${http3}/readyz`)).ok; } catch { return false; }
  });
  const page3 = await browser.newPage({ viewport: { width: 1366, height: 900 } });
  await page3.goto(`http://127.0.0.1:${http3}/`);
  const pub = spawn(bin, ["publish", short, "--restamp", "--connect", `tcp/127.0.0.1:${zport3}`, "--no-multicast"],
    { cwd: root, env, stdio: ["ignore", "ignore", "inherit"] });
  await until("estimate/objects live on the page", 20, async () =>
    (await page3.locator('#topics tr[data-role="estimate/objects"]').getAttribute("data-state")) === "ok");
  await new Promise((r) => pub.once("exit", r));
  await until("the roles and the GOSPA tile to turn stale", 15, async () =>
    (await page3.locator('#topics tr[data-role="estimate/objects"]').getAttribute("data-state")) === "stale" &&
    (await page3.locator('#topics tr[data-role="reference/ego"]').getAttribute("data-state")) === "stale" &&
    (await page3.locator('.tile[data-metric="gospa"]').getAttribute("data-state")) === "stale" &&
    (await page3.locator("#link").getAttribute("data-state")) === "stale");
  const header = await page3.locator("#link").innerText();
  if (!/STALE/.test(header)) throw new Error(`the header says: ${header}`);
  const staleText = await page3.locator('.tile[data-metric="gospa"] .age').innerText();
  if (!/STALE/.test(staleText)) throw new Error(`the stale tile says: ${staleText}`);
  await page3.screenshot({ path: path.join(out, "dashboard-stale-wide.png"), fullPage: true });
  ok("a quiet stack turns its roles, tiles and the header stale while the page streams");
  await page3.close();
} catch (e) {
  failed = true;
  console.error("browser-check: FAILED:", e.message);
} finally {
  if (browser) await browser.close();
  if (demo && demo.exitCode === null) {
    const exited = new Promise((r) => demo.once("exit", r));
    demo.kill("SIGTERM");
    await Promise.race([exited, sleep(15000)]);
  }
}
process.exit(failed ? 1 : 0);
