/**
 * State of the model page: what the insights API returned, the trial cutoff and its figures
 * (recomputed in the browser on every move), and the admin actions (publish a cutoff, roll back,
 * promote or discard the shadow).
 */
import type { OperatingTable } from "../../../shared-model/src/tuning";
import type { HistogramData, ModelPageData, OperatingData, ShadowData } from "@contract";
import { activateModel, ApiError, clearShadow, modelPage, operatingTable, publishCutoff, rollbackModel, scoreHistogram, shadowComparison } from "./api";
import { buildTable, cutoffView, sliderMax, type CutoffView } from "./cutoff-figures";

export class ModelPage {
  data = $state.raw<ModelPageData | null>(null);
  /** Large parallel arrays: replaced whole, never mutated, so not deeply reactive. */
  operating = $state.raw<OperatingData | null>(null);
  shadow = $state.raw<ShadowData | null>(null);
  histogram = $state.raw<HistogramData | null>(null);
  /** The d² cutoff under consideration (starts at the live one). */
  cutoff = $state(0);
  loading = $state(false);
  busy = $state(false);
  notice = $state<{ kind: "ok" | "error"; text: string } | null>(null);

  /** The labelled operating table, or why there is none. */
  table = $derived.by<OperatingTable | string | null>(() => (this.operating ? buildTable(this.operating.labels) : null));
  /** Figures at the cutoff under consideration; null while there is no table. */
  view = $derived.by<CutoffView | null>(() => {
    const table = this.table;
    if (!this.operating || table === null || typeof table === "string" || !(this.cutoff >= 0)) return null;
    return cutoffView(table, this.operating.labels, this.cutoff, this.operating.traffic.scoredPerDay);
  });
  /** Figures at the live cutoff, for comparison. */
  liveView = $derived.by<CutoffView | null>(() => {
    const table = this.table;
    if (!this.operating || table === null || typeof table === "string") return null;
    return cutoffView(table, this.operating.labels, this.operating.cutoff.mahalanobisSq, this.operating.traffic.scoredPerDay);
  });
  sliderTop = $derived(this.operating ? sliderMax(this.operating.labels.mahalanobisSq, this.operating.cutoff.mahalanobisSq) : 100);

  /** Loads (or reloads) everything the page shows; the cutoff returns to the live one. */
  async load(): Promise<void> {
    this.loading = true;
    try {
      const data = await modelPage();
      const [operating, shadow, histogram] = await Promise.all([operatingTable(data.active.version), shadowComparison(), scoreHistogram()]);
      this.data = data;
      this.operating = operating;
      this.shadow = shadow;
      this.histogram = histogram;
      this.cutoff = operating.cutoff.mahalanobisSq;
    } catch (error) {
      this.notice = { kind: "error", text: error instanceof ApiError ? error.message : "The model page could not be loaded." };
    } finally {
      this.loading = false;
    }
  }

  /** Publishes the cutoff under consideration as a new live version (admins; confirmed by the caller). */
  async publish(reason: string): Promise<boolean> {
    if (!this.data) return false;
    return this.act(async () => {
      const done = await publishCutoff({
        fromVersion: this.data!.active.version,
        cutoffMahalanobisSq: this.cutoff,
        flagRate: this.view ? this.view.point.flagRate : null,
        reason,
        confirm: "publish",
      });
      return `Published ${done.version} with cutoff d² ${done.cutoff.toMahalanobisSq.toFixed(2)}; it is live now.`;
    });
  }

  /** Rolls back to the previously live version (admins; confirmed by the caller). */
  async rollback(): Promise<boolean> {
    return this.act(async () => {
      const done = await rollbackModel();
      return `Rolled back: ${done.pointer.version} is live again.`;
    });
  }

  /** Makes the shadow the live model (admins; confirmed by the caller): the audited activate. */
  async promote(): Promise<boolean> {
    const shadow = this.data?.pointer.shadow;
    if (!shadow) return false;
    return this.act(async () => {
      const done = await activateModel(shadow);
      return `Promoted ${shadow}: it is live now; ${done.pointer.previous[0] ?? "the previous version"} stays available to roll back to.`;
    });
  }

  /** Stops the shadow scoring (admins; confirmed by the caller); its version stays stored. */
  async discard(): Promise<boolean> {
    const shadow = this.data?.pointer.shadow;
    if (!shadow) return false;
    return this.act(async () => {
      await clearShadow();
      return `Discarded the shadow ${shadow}: it no longer scores; the version stays stored.`;
    });
  }

  private async act(action: () => Promise<string>): Promise<boolean> {
    this.busy = true;
    try {
      const text = await action();
      await this.load();
      this.notice = { kind: "ok", text };
      return true;
    } catch (error) {
      this.notice = { kind: "error", text: error instanceof ApiError ? error.message : "The change failed." };
      return false;
    } finally {
      this.busy = false;
    }
  }
}
