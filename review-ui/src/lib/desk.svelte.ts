/**
 * The analyst's desk: the queue page on screen, its filters and order, the selected line, the open
 * payment's evidence, the day's figures, and every action (claim, release, decide, undo). Components
 * read this state and call these methods; none of them talks to the API directly.
 */
import * as api from "./api";
import type { ListQuery } from "./api";
import type { AccountDecision, DaySummary, Facets, ItemDetail, Outcome, QueueRow, SortDirection, SortKey, StateCounts } from "@contract";
import { describeAccountDecision } from "./words";

export type Filters = Pick<ListQuery, "state" | "segment" | "modelVersion" | "selection" | "from" | "to">;

const PAGE_SIZE = 50;

/** Natural first direction per column: most urgent, rarest, largest, oldest first. */
const FIRST_DIRECTION: Record<SortKey, SortDirection> = { priority: "desc", tail: "asc", amount: "desc", age: "asc" };

export class Desk {
  filters = $state<Filters>({ state: "open", segment: "", modelVersion: "", selection: "", from: "", to: "" });
  sort = $state<SortKey>("priority");
  direction = $state<SortDirection>("desc");
  /** The page on screen; replaced whole, never mutated, hence raw. */
  rows = $state.raw<QueueRow[]>([]);
  counts = $state.raw<StateCounts | null>(null);
  summary = $state.raw<DaySummary | null>(null);
  facets = $state.raw<Facets>({ segments: [], modelVersions: [] });
  detail = $state.raw<ItemDetail | null>(null);
  selected = $state(0);
  loading = $state(false);
  busy = $state(false);
  /** One line of feedback for the status bar (polite live region). */
  notice = $state<{ text: string; tone: "info" | "error" } | null>(null);
  /** The item whose decision `u` reverts, with the end of its undo window. */
  lastDecision = $state<{ id: number; until: string } | null>(null);
  pageCursors = $state<(string | null)[]>([null]);
  nextCursor = $state<string | null>(null);

  selectedRow = $derived<QueueRow | null>(this.rows[this.selected] ?? null);
  pageNumber = $derived(this.pageCursors.length);

  constructor(private readonly me: () => string | null) {}

  async start(): Promise<void> {
    await Promise.all([this.load(), this.refreshSummary(), this.loadFacets()]);
  }

  /** Loads the current page under the current filters and order. */
  async load(): Promise<void> {
    this.loading = true;
    try {
      const cursor = this.pageCursors[this.pageCursors.length - 1] ?? null;
      const page = await api.listItems({ ...this.filters, sort: this.sort, direction: this.direction, limit: PAGE_SIZE, cursor });
      this.rows = page.items;
      this.counts = page.counts;
      this.nextCursor = page.nextCursor;
      this.selected = Math.min(this.selected, Math.max(0, page.items.length - 1));
    } catch (err) {
      this.fail(err);
    } finally {
      this.loading = false;
    }
  }

  /** Applies changed filters from the first page. */
  async applyFilters(next: Partial<Filters>): Promise<void> {
    this.filters = { ...this.filters, ...next };
    this.pageCursors = [null];
    this.selected = 0;
    await this.load();
  }

  /** Sorts by a column; a second click on the same column flips the direction. */
  async sortBy(key: SortKey): Promise<void> {
    this.direction = key === this.sort ? (this.direction === "asc" ? "desc" : "asc") : FIRST_DIRECTION[key];
    this.sort = key;
    this.pageCursors = [null];
    this.selected = 0;
    await this.load();
  }

  async nextPage(): Promise<void> {
    if (!this.nextCursor) return;
    this.pageCursors = [...this.pageCursors, this.nextCursor];
    this.selected = 0;
    await this.load();
  }

  async previousPage(): Promise<void> {
    if (this.pageCursors.length <= 1) return;
    this.pageCursors = this.pageCursors.slice(0, -1);
    this.selected = 0;
    await this.load();
  }

  move(delta: number): void {
    if (this.rows.length === 0) return;
    this.selected = Math.min(this.rows.length - 1, Math.max(0, this.selected + delta));
  }

  async refreshSummary(): Promise<void> {
    try {
      this.summary = await api.daySummary();
    } catch (err) {
      this.fail(err);
    }
  }

  async loadFacets(): Promise<void> {
    try {
      this.facets = await api.facets();
    } catch (err) {
      this.fail(err);
    }
  }

  async openDetail(id: number): Promise<void> {
    if (this.detail?.item.id !== id) this.detail = null;
    try {
      this.detail = await api.getItem(id);
      const index = this.rows.findIndex((r) => r.id === id);
      if (index >= 0) this.selected = index;
    } catch (err) {
      this.fail(err);
    }
  }

  claim(id: number): Promise<void> {
    return this.act(
      id,
      () => api.claimItem(id),
      (row) => `Payment ${row.transactionId} is claimed by you until ${clock(row.claim?.until)}.`,
    );
  }

  release(id: number): Promise<void> {
    return this.act(
      id,
      () => api.releaseItem(id),
      (row) => `Payment ${row.transactionId} is released and open again.`,
    );
  }

  /** Records a decision, claiming the item first when the analyst does not hold a live claim on it. */
  decide(id: number, outcome: Outcome, note?: string): Promise<void> {
    return this.act(
      id,
      async () => {
        if (!this.holds(id)) await api.claimItem(id);
        const result = await api.decideItem(id, outcome, note);
        if (result.undoableUntil) this.lastDecision = { id, until: result.undoableUntil };
        return result;
      },
      (row) => `${row.transactionId} ${outcome === "fraud" ? "confirmed as fraud" : "dismissed as legitimate"}. Press u to undo.`,
      true,
    );
  }

  /**
   * Decides the named flags of the account of item `anchorId` together; each flag claimed by a
   * colleague or already decided is left as it was and named in the status line. Resolves true
   * when the request was answered (whatever was decided), false when it failed.
   */
  async decideAccount(anchorId: number, items: readonly QueueRow[], outcome: Outcome, note?: string): Promise<boolean> {
    if (this.busy) return false;
    this.busy = true;
    const names = new Map(items.map((i) => [i.id, i.transactionId]));
    try {
      const answer = await api.decideAccount(
        anchorId,
        items.map((i) => i.id),
        outcome,
        note,
      );
      const changed = new Map(answer.decided.map((d) => [d.item.id, d.item]));
      this.rows = this.rows.map((r) => changed.get(r.id) ?? r);
      this.notice = { text: describeAccountDecision(answer, names, clock), tone: answer.refused.length > 0 ? "error" : "info" };
      return true;
    } catch (err) {
      // Nothing decided: the refusal carries the same report, worded the same way.
      const body = err instanceof api.ApiError && err.code === "none-decided" ? (err.body as AccountDecision) : null;
      if (body) this.notice = { text: describeAccountDecision(body, names, clock), tone: "error" };
      else this.fail(err);
      return body !== null;
    } finally {
      this.busy = false;
      if (this.detail) void this.openDetail(this.detail.item.id);
      void this.refreshCounts();
    }
  }

  /** Reverts the analyst's latest decision while its undo window is open. */
  undo(): Promise<void> {
    const last = this.lastDecision;
    if (!last || Date.parse(last.until) < Date.now()) {
      this.notice = { text: "Nothing to undo: no decision of yours in the last few minutes.", tone: "info" };
      return Promise.resolve();
    }
    this.lastDecision = null;
    // Back to the undone payment, so the next key acts on it.
    const index = this.rows.findIndex((r) => r.id === last.id);
    if (index >= 0) this.selected = index;
    return this.act(
      last.id,
      () => api.undoDecision(last.id),
      (row) => `Decision on ${row.transactionId} undone; it is yours to decide again.`,
    );
  }

  private holds(id: number): boolean {
    const row = this.rows.find((r) => r.id === id) ?? (this.detail?.item.id === id ? this.detail.item : null);
    const claim = row?.claim;
    return !!claim && claim.by === this.me() && Date.parse(claim.until) > Date.now() + 5_000;
  }

  private async act(id: number, call: () => Promise<{ item: QueueRow }>, success: (row: QueueRow) => string, advance = false): Promise<void> {
    if (this.busy) {
      // One change at a time, so two quick keys cannot race each other on the server.
      this.notice = { text: "One moment: the last change is still being saved.", tone: "info" };
      return;
    }
    this.busy = true;
    try {
      const { item } = await call();
      this.rows = this.rows.map((r) => (r.id === id ? item : r));
      this.notice = { text: success(item), tone: "info" };
      if (advance && this.selectedRow?.id === id) this.move(1);
      if (this.detail?.item.id === id) void this.openDetail(id);
      void this.refreshCounts();
    } catch (err) {
      this.showHolder(id, err);
      this.fail(err);
    } finally {
      this.busy = false;
    }
  }

  /** After a refused claim, show on the line who holds the item (the list may predate their claim). */
  private showHolder(id: number, err: unknown): void {
    if (!(err instanceof api.ApiError) || err.code !== "claimed-by-another") return;
    const claim = (err.body as { claim?: { by: string; until: string } }).claim;
    if (!claim) return;
    this.rows = this.rows.map((r) => (r.id === id ? { ...r, claim, state: r.state === "decided" ? r.state : "claimed" } : r));
  }

  /** Counts and the day's figures after a change (or on a timer), without reloading the page on screen. */
  async refreshCounts(): Promise<void> {
    await this.refreshSummary();
    try {
      this.counts = await api.countItems(this.filters);
    } catch (err) {
      this.fail(err);
    }
  }

  private fail(err: unknown): void {
    const text = err instanceof Error ? err.message : "Something went wrong.";
    this.notice = { text, tone: "error" };
  }
}

function clock(iso: string | undefined): string {
  return iso ? new Date(iso).toLocaleTimeString("en-GB", { hour: "2-digit", minute: "2-digit" }) : "—";
}
