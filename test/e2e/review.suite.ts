/**
 * An analyst's morning in a real browser: sign in with a personal credential, work the demo queue
 * from the keyboard (claim, confirm as fraud, dismiss with a note, undo), see the counts move, meet
 * a colleague's claim, open the evidence, reload and find every decision kept. A note holding
 * markup and script stays inert text. Screenshots of the queue and the payment view are written to
 * test-output/screenshots (and to docs/screenshots with UPDATE_SCREENSHOTS=1).
 */
import { mkdir, rm } from "node:fs/promises";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, it } from "vitest";
import type { Browser, Page } from "playwright-core";
import { fitModel } from "../../shared-model/src";
import { generateLedger, type LedgerRow } from "../../demo-ledger/generate";
import { DEMO_FEATURES, seedDemoQueue } from "./demo-queue";
import { launchChromium, repoRoot, startStack, type Stack } from "./stack";

/**
 * Every string the review store keeps, each with SQL metacharacters and markup that would run
 * (ids, account and segment are printable ASCII without spaces by the API's rules; `/` separates).
 */
const HOSTILE = {
  transactionId: `tx'";DROP/**/TABLE/**/review_items;--<script>alert("tx")</script>`,
  accountRef: `acct'OR'1'='1";<img/src=x/onerror=alert('acct')>`,
  segment: `web<svg/onload=alert('seg')>'--`,
  note: `'); DELETE FROM review_events; -- <iframe src="javascript:alert('note')"></iframe><b onclick="alert(1)">x</b>`,
};

const HOSTILE_NOTE = `Customer called back. <script>window.__injected = "script"</script><img src="x" onerror="window.__injected = 'img'"> ok`;

let stack: Stack;
let browser: Browser;
let page: Page;
const shots = process.env.UPDATE_SCREENSHOTS === "1" ? join(repoRoot, "docs/screenshots") : join(repoRoot, "test-output/screenshots");

/** Polls until `check` returns true (the app updates after network round trips). */
async function until(check: () => Promise<boolean>, what: string, timeoutMs = 10_000): Promise<void> {
  const deadline = Date.now() + timeoutMs;
  while (!(await check())) {
    if (Date.now() > deadline) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 50));
  }
}

const text = (testId: string, nth = 0) => page.getByTestId(testId).nth(nth).innerText();
const count = async (state: string) => Number((await text(`count-${state}`)).replace(/,/g, ""));
/** The state badge of a queue line: "Open", "Claimed · by you until 14:05", "Decided · fraud by you". */
const rowBadge = (index: number) => page.getByTestId("queue-row").nth(index).getByTestId("state-badge").innerText();

async function api<T>(path: string, token: string, body?: unknown): Promise<{ status: number; body: T }> {
  const res = await fetch(`${stack.base}${path}`, {
    method: body === undefined ? "GET" : "POST",
    headers: { authorization: `Bearer ${token}`, ...(body === undefined ? {} : { "content-type": "application/json" }) },
    body: body === undefined ? undefined : JSON.stringify(body),
  });
  return { status: res.status, body: (await res.json()) as T };
}

describe("the review app in Chromium", () => {
  beforeAll(async () => {
    stack = await startStack(`e2e-review-${process.pid}`, { ANALYST_DAILY_CAPACITY: "150" });
    await seedDemoQueue(stack.base, stack.tokens);
    browser = await launchChromium();
    page = await browser.newPage({ viewport: { width: 1280, height: 800 } });
    await mkdir(shots, { recursive: true });
  });

  afterAll(async () => {
    await browser?.close();
    await stack?.stop();
    // Keep the wrangler log beside it for a failed run; the local D1/KV state is not needed.
    if (stack) await rm(join(stack.stateDir, "state"), { recursive: true, force: true });
  });

  it("refuses a wrong credential, then signs the analyst in and shows who is signed in", async () => {
    await page.goto(stack.base);
    expect(await text("sign-in-record")).toContain("recorded under your name");
    await page.getByLabel("Personal credential").fill("not-a-real-credential-000000");
    await page.getByRole("button", { name: "Sign in" }).click();
    await until(async () => (await page.getByRole("alert").count()) > 0, "the refusal");
    expect(await page.getByRole("alert").innerText()).toContain("not accepted");

    await page.getByLabel("Personal credential").fill(stack.tokens.analyst);
    await page.getByRole("button", { name: "Sign in" }).click();
    await page.getByTestId("signed-in-user").waitFor();
    expect(await text("signed-in-user")).toBe("rosa");
    await page.getByTestId("queue-row").first().waitFor();
    expect(await count("open")).toBeGreaterThan(10);
    expect(await page.getByTestId("caution").first().innerText()).toContain("A score is evidence, not a verdict.");
  });

  it("names the lists, the columns and the reasons in one vocabulary: Open, Claimed, Decided; Reason in queue; Status", async () => {
    const tabs = await Promise.all(["open", "claimed", "decided"].map(async (state) => (await text(`state-${state}`)).replace(/[\d,\s]+$/, "")));
    expect(tabs).toEqual(["Open", "Claimed", "Decided"]);
    const headers = await page.getByTestId("queue-table").locator("thead th").allInnerTexts();
    expect(headers.map((h) => h.replace(/[^A-Za-z ]/g, "").trim())).toEqual(["Priority", "Payment", "How rare", "Amount", "Segment", "Time in queue", "Reason in queue", "Status"]);
    // The filter on that column has the same label and the same values as the column shows.
    const filter = page.getByLabel("Reason in queue");
    expect(await filter.locator("option").allInnerTexts()).toEqual(["any", "beyond the cutoff", "audit draw"]);
    const shown = new Set(await page.getByTestId("queue-row").locator("td:nth-child(7)").allInnerTexts());
    for (const value of shown) expect(["beyond the cutoff", "audit draw"]).toContain(value);
    expect(new Set(await page.getByTestId("state-badge").allInnerTexts())).toEqual(new Set(["Open"]));
    expect(await page.getByRole("button", { name: /Keyboard shortcuts/ }).count()).toBe(1);
  });

  it("claims and confirms fraud with the keyboard, and the counts and the day's figures move", async () => {
    const open = await count("open");
    const decidedToday = Number(await text("decided-today"));
    await page.keyboard.press("c");
    await until(async () => (await rowBadge(0)).startsWith("Claimed · by you until"), "the claim");
    expect(await text("status-line")).toContain("is claimed by you until");
    await page.keyboard.press("f");
    await until(async () => (await rowBadge(0)) === "Decided · fraud by you", "the decision");
    await until(async () => (await count("open")) === open - 1 && (await count("decided")) === 1, "the counts");
    await until(async () => Number(await text("decided-today")) === decidedToday + 1, "the day's figures");
    // The selection moved on to the next payment.
    expect(await page.getByTestId("queue-row").nth(1).getAttribute("aria-selected")).toBe("true");
  });

  it("dismisses as legitimate with a note holding markup, which stays inert text", async () => {
    await page.keyboard.press("n");
    await page.getByTestId("note-dialog").waitFor();
    expect(await text("note-caution")).toMatch(/Do not write card numbers, names, addresses/);
    await page.getByLabel(/Note for the audit trail/).fill(HOSTILE_NOTE);
    expect(await page.getByTestId("note-dialog").getByTestId("caution").innerText()).toContain("evidence, not a verdict");
    await page.getByRole("button", { name: "Dismiss as legitimate" }).click();
    await until(async () => (await rowBadge(1)) === "Decided · legitimate by you", "the dismissal");

    await page.keyboard.press("k");
    await page.keyboard.press("Enter");
    await page.getByTestId("decision-note").waitFor();
    expect(await page.getByTestId("decision-note").innerText()).toBe(HOSTILE_NOTE);
    expect(await page.getByTestId("audit-note").last().innerText()).toBe(HOSTILE_NOTE);
    expect(await page.locator("[data-testid=decision-note] img, [data-testid=audit-note] img, [data-testid=decision-note] script").count()).toBe(0);
    expect(await page.evaluate(() => (window as unknown as { __injected?: string }).__injected)).toBeUndefined();
    expect(await text("decision-state")).toContain("Decided legitimate by rosa");
    expect(await text("state-badge")).toBe("Decided · legitimate by you");
  });

  it("shows the evidence: plain-words reasons, residual bars, the pair plot and the audit trail", async () => {
    await page.keyboard.press("Escape");
    await page.getByTestId("queue-table").waitFor();
    await page.keyboard.press("j");
    await page.keyboard.press("Enter");
    await page.getByTestId("evidence").waitFor();
    const evidence = await text("evidence");
    expect(evidence).toMatch(/— expected .+ given the other features/);
    expect(evidence).toMatch(/\d\.\d SD from expected/);
    expect(evidence).not.toMatch(/expected (\S+)–\1 given/);
    // The modeller's figures wait in a closed details block; the reasons and how rare come first.
    expect(await text("how-rare")).toMatch(/^(1 in |rarer than|\d)/);
    const details = page.getByTestId("model-details");
    expect(await details.evaluate((el) => (el as HTMLDetailsElement).open)).toBe(false);
    expect(await details.getByText("Log-density").isVisible()).toBe(false);
    await details.locator("summary").click();
    expect(await details.getByText("Log-density").isVisible()).toBe(true);
    await details.locator("summary").click();
    await page.getByTestId("residual-chart").waitFor();
    expect(await page.getByTestId("residual-chart").locator("rect.bar").count()).toBe(9);
    await page.getByTestId("pair-chart").waitFor();
    expect(await page.getByTestId("pair-chart").locator("path.ring").count()).toBe(3);
    const ticks = await page.getByTestId("pair-chart").locator("text.tick").allInnerTexts();
    expect(ticks.length).toBeGreaterThanOrEqual(4);
    expect(await page.getByText("A score is evidence, not a verdict.").first().isVisible()).toBe(true);
    // The trail says how long it is and in which order it runs (it is served a page at a time).
    expect(await text("audit-count")).toMatch(/^\(\d+ events?, newest first\)$/);
    // A tall window, so the whole view fits above the status bar.
    await page.setViewportSize({ width: 1280, height: 1560 });
    await page.screenshot({ path: join(shots, "payment-view.png") });
    await page.setViewportSize({ width: 1280, height: 800 });
  });

  it("names the colleague who took a payment since the list was loaded when the analyst tries to take it", async () => {
    await page.keyboard.press("Escape");
    await page.getByTestId("queue-table").waitFor();
    const index = await page
      .getByTestId("queue-row")
      .evaluateAll((els) => els.findIndex((e) => e.querySelector("[data-testid=state-badge]")?.getAttribute("data-state") === "open"));
    const id = Number(await page.getByTestId("queue-row").nth(index).getAttribute("data-item-id"));
    // A colleague takes it through the API while this list is on screen.
    expect((await api(`/v1/review/items/${id}/claim`, stack.tokens.analyst2, {})).status).toBe(200);
    await page.getByTestId("queue-row").nth(index).click();
    await page.keyboard.press("c");
    await until(async () => (await text("status-line")).includes("tomas"), "the refusal naming the holder");
    expect(await text("status-line")).toMatch(/claimed by tomas until/);
    expect(await page.getByTestId("status-line").getAttribute("class")).toContain("error");
    await until(async () => (await rowBadge(index)).startsWith("Claimed · by tomas until"), "the line showing the holder");
    // The Claimed list shows it too.
    await page.getByTestId("state-claimed").click();
    await until(async () => (await page.getByTestId("queue-row").count()) === 1, "the claimed list");
    expect(await rowBadge(0)).toContain("Claimed · by tomas");
    await page.getByTestId("state-open").click();
    await until(async () => (await page.getByTestId("queue-row").count()) > 1, "the open list");
  });

  it("undoes a decision with u", async () => {
    const index = await page
      .getByTestId("queue-row")
      .evaluateAll((els) => els.findIndex((e) => e.querySelector("[data-testid=state-badge]")?.getAttribute("data-state") === "open"));
    await page.getByTestId("queue-row").nth(index).click();
    await page.keyboard.press("l");
    await until(async () => (await rowBadge(index)).startsWith("Decided · legitimate"), "the dismissal");
    await page.keyboard.press("u");
    await until(async () => (await rowBadge(index)).startsWith("Claimed · by you"), "the undo");
    expect(await text("status-line")).toContain("undone");
    await page.keyboard.press("r");
    await until(async () => (await rowBadge(index)) === "Open", "the release");
  });

  it("keeps the decisions after a reload, and the Decided list shows them", async () => {
    await page.reload();
    await page.getByTestId("signed-in-user").waitFor();
    await page.getByTestId("state-decided").click();
    await until(async () => (await page.getByTestId("queue-row").count()) === 2, "the decided list");
    expect((await page.getByTestId("state-badge").allInnerTexts()).sort()).toEqual(["Decided · fraud by you", "Decided · legitimate by you"]);
    await page.getByTestId("state-open").click();
    await until(async () => (await page.getByTestId("queue-row").first().getAttribute("data-item-id")) !== null, "the open list");
  });

  it("opens the help overlay with ? and lists every key", async () => {
    await page.keyboard.press("?");
    await page.getByTestId("help-overlay").waitFor({ state: "visible" });
    const help = await text("help-overlay");
    expect(help).toMatch(/^Keyboard shortcuts/);
    for (const word of ["Next payment", "Confirm as fraud", "Dismiss as legitimate", "Write a note", "Undo"]) expect(help).toContain(word);
    await page.keyboard.press("Escape");
    await page.getByTestId("help-overlay").waitFor({ state: "hidden" });
  });

  it("shows an account's burst of flags together and decides them from the keyboard, leaving the flag a colleague claimed meanwhile", async () => {
    // A burst from one account (invented): six payments far outside the demo model's normal traffic.
    const normal = [...generateLedger({ rows: 400 })].find((r) => r.label === "legitimate")!;
    const account = "acct-e2e-burst";
    for (let k = 1; k <= 6; k++) {
      const features: Record<string, number> = {};
      for (const f of DEMO_FEATURES) features[f.name] = normal[f.name as keyof LedgerRow] as number;
      features.amount *= 60 + k;
      features.shipDistanceKm = 8_000 + k;
      const scored = await api<{ decision: string }>("/v1/score", stack.tokens.flow, { transactionId: `e2e-burst-${k}`, features, segment: "web", accountRef: account });
      expect(scored.body.decision).toBe("review");
    }
    const ids = new Map<string, number>();
    await until(
      async () => {
        const listed = await api<{ items: { id: number; transactionId: string }[] }>("/v1/review/items?sort=age&direction=desc&limit=50", stack.tokens.analyst);
        for (const i of listed.body.items) if (i.transactionId.startsWith("e2e-burst-")) ids.set(i.transactionId, i.id);
        return ids.size === 6;
      },
      "the burst in the queue",
      15_000,
    );
    const id = (k: number) => ids.get(`e2e-burst-${k}`)!;
    // A colleague already decided one of them: it is not among the open flags.
    expect((await api(`/v1/review/items/${id(6)}/claim`, stack.tokens.analyst2, {})).status).toBe(200);
    expect((await api(`/v1/review/items/${id(6)}/decision`, stack.tokens.analyst2, { outcome: "legitimate" })).status).toBe(200);

    await page.goto(`${stack.base}/#/item/${id(1)}`);
    await page.getByTestId("evidence").waitFor();
    await page.keyboard.press("a");
    await page.getByTestId("account-flags").waitFor({ state: "visible" });
    await until(async () => (await page.getByTestId("account-flag").count()) === 5, "the account's five open flags");
    expect(await page.getByTestId("account-flags").getByTestId("state-badge").allInnerTexts()).toEqual(["Open", "Open", "Open", "Open", "Open"]);
    expect(await page.getByTestId("account-fraud").innerText()).toMatch(/^Confirm 5 as fraud/);
    await page.screenshot({ path: join(shots, "account-flags.png") });
    // The colleague claims one while the dialog is open; deciding goes on for the rest.
    expect((await api(`/v1/review/items/${id(2)}/claim`, stack.tokens.analyst2, {})).status).toBe(200);
    await page.keyboard.press("f");
    await page.getByTestId("account-flags").waitFor({ state: "hidden" });
    await until(async () => (await text("status-line")).includes("confirmed as fraud"), "the report");
    expect(await text("status-line")).toMatch(/^4 flags of acct-e2e-burst confirmed as fraud\. Left as they were: e2e-burst-2 \(claimed by tomas until \d\d:\d\d\)\.$/);

    // Each decided flag has its own claim and decision rows; the colleague's claim and decision stand.
    for (const k of [1, 3, 4, 5]) {
      const detail = await api<{ item: { decision: { outcome: string; by: string } | null }; events: { action: string; actor: string }[] }>(
        `/v1/review/items/${id(k)}`,
        stack.tokens.analyst,
      );
      expect(detail.body.item.decision).toMatchObject({ outcome: "fraud", by: "rosa" });
      expect(detail.body.events.map((e) => `${e.action}:${e.actor}`)).toEqual(["decide:rosa", "claim:rosa"]);
    }
    const held = await api<{ item: { state: string; claim: { by: string } | null } }>(`/v1/review/items/${id(2)}`, stack.tokens.analyst);
    expect(held.body.item).toMatchObject({ state: "claimed", claim: { by: "tomas" } });
    const kept = await api<{ item: { decision: { outcome: string; by: string } | null } }>(`/v1/review/items/${id(6)}`, stack.tokens.analyst);
    expect(kept.body.item.decision).toMatchObject({ outcome: "legitimate", by: "tomas" });
    // The payment view shows its own badge and the account's others in the same words.
    await until(async () => (await text("state-badge")) === "Decided · fraud by you", "the payment's badge");
    const others = await page.getByTestId("account-history").getByTestId("state-badge").allInnerTexts();
    expect(others.filter((b) => b === "Decided · fraud").length).toBe(3);
    expect(others).toContain("Claimed");
    await page.keyboard.press("Escape");
    await page.getByTestId("queue-table").waitFor();
  });

  it("fits a 1280×800 screen and a narrow laptop window without sideways scrolling of the page", async () => {
    await page.getByTestId("queue-row").first().waitFor();
    await page.screenshot({ path: join(shots, "queue.png") });
    for (const width of [1280, 900]) {
      await page.setViewportSize({ width, height: 800 });
      const overflow = await page.evaluate(() => document.documentElement.scrollWidth - window.innerWidth);
      expect(overflow, `width ${width}`).toBeLessThanOrEqual(0);
    }
    // Every form control has an accessible name.
    const unnamed = await page.evaluate(
      () =>
        Array.from(document.querySelectorAll("input, select, textarea, button")).filter((el) => {
          const labelled = (el as HTMLInputElement).labels?.length || el.getAttribute("aria-label") || (el.textContent ?? "").trim();
          return !labelled;
        }).length,
    );
    expect(unnamed).toBe(0);
    await page.setViewportSize({ width: 1280, height: 800 });
  });

  // Last in the file: it activates a model of its own.
  it("stores SQL metacharacters and markup in every string verbatim and renders them inert", async () => {
    // A model whose "web" segment carries a hostile name, so the stored segment is hostile too.
    const rows = [...generateLedger({ rows: 6_000 })].filter((r) => r.label === "legitimate");
    const { artifact } = await fitModel(
      {
        async *pass() {
          yield* rows.map((r) => ({
            values: Float64Array.from(DEMO_FEATURES.map((f) => r[f.name as keyof LedgerRow] as number)),
            segment: r.channel === "web" ? HOSTILE.segment : r.channel,
          }));
        },
      },
      { features: DEMO_FEATURES, shape: "auto", estimator: "classical", segmentBy: "channel", cutoffRate: 0.01, seed: 3, source: "e2e injection (invented)" },
    );
    expect((await api(`/v1/models`, stack.tokens.admin, artifact)).status).toBe(201);
    expect((await api(`/v1/models/${artifact.version}/activate`, stack.tokens.admin, {})).status).toBe(200);
    const features: Record<string, number> = {};
    for (const f of DEMO_FEATURES) features[f.name] = rows[0][f.name as keyof LedgerRow] as number;
    features.amount *= 80;
    features.shipDistanceKm = 9_000;
    const scored = await api<{ decision: string; segment: string }>("/v1/score", stack.tokens.flow, {
      transactionId: HOSTILE.transactionId,
      features,
      segment: HOSTILE.segment,
      accountRef: HOSTILE.accountRef,
    });
    expect(scored.status).toBe(200);
    expect(scored.body).toMatchObject({ decision: "review", segment: HOSTILE.segment });

    let id = 0;
    await until(
      async () => {
        const page1 = await api<{ items: { id: number; transactionId: string }[] }>(`/v1/review/items?segment=${encodeURIComponent(HOSTILE.segment)}`, stack.tokens.analyst);
        id = page1.body.items.find((i) => i.transactionId === HOSTILE.transactionId)?.id ?? 0;
        return id > 0;
      },
      "the hostile flag in the queue",
      15_000,
    );
    expect((await api(`/v1/review/items/${id}/claim`, stack.tokens.analyst, {})).status).toBe(200);
    expect((await api(`/v1/review/items/${id}/decision`, stack.tokens.analyst, { outcome: "fraud", note: HOSTILE.note })).status).toBe(200);
    // Read back through the API: every string exactly as sent, and the audit table still there.
    const detail = await api<{ item: { transactionId: string; segment: string; accountRef: string; decision: { note: string } }; events: { note: string | null }[] }>(
      `/v1/review/items/${id}`,
      stack.tokens.analyst,
    );
    expect(detail.body.item).toMatchObject({ transactionId: HOSTILE.transactionId, segment: HOSTILE.segment, accountRef: HOSTILE.accountRef, decision: { note: HOSTILE.note } });
    expect(detail.body.events.map((e) => e.note)).toContain(HOSTILE.note);

    // In the browser: the payment view shows them as text; no dialog, no injected element, no script ran.
    let dialogs = 0;
    page.on("dialog", (dialog) => {
      dialogs++;
      void dialog.dismiss();
    });
    await page.goto(`${stack.base}/#/item/${id}`);
    await page.getByTestId("decision-note").waitFor();
    expect(await page.getByTestId("decision-note").innerText()).toBe(HOSTILE.note);
    const shown = await page.evaluate(() => document.body.innerText);
    for (const value of [HOSTILE.transactionId, HOSTILE.accountRef, HOSTILE.segment]) expect(shown).toContain(value);
    const injected = await page.evaluate(() => document.querySelectorAll("script:not([src]), img[src='x'], svg[onload], iframe, [onerror], [onload], [onclick]").length);
    expect(injected).toBe(0);
    expect(await page.evaluate(() => (window as unknown as { __injected?: string }).__injected)).toBeUndefined();
    expect(dialogs).toBe(0);
  });
});
