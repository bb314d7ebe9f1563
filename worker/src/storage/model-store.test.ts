import { describe, expect, test } from "vitest";
import { MAX_PREVIOUS_VERSIONS, type ModelPointer } from "../contract/wire";
import { activatedPointer } from "./model-store";

const at = new Date("2026-12-04T10:00:00.000Z");
const pointer = (version: string, shadow: string | null, previous: string[]): ModelPointer => ({
  version,
  shadow,
  previous,
  updatedAt: "2026-12-01T00:00:00.000Z",
  updatedBy: "ops-ana",
});

describe("activatedPointer", () => {
  test("puts the version that was live at the head of the rollback list and records who and when", () => {
    expect(activatedPointer(pointer("m2", null, ["m1"]), "m3", "rosa", at)).toEqual({
      version: "m3",
      shadow: null,
      previous: ["m2", "m1"],
      updatedAt: "2026-12-04T10:00:00.000Z",
      updatedBy: "rosa",
    });
  });

  test("starts an empty rollback list for the first activation", () => {
    expect(activatedPointer(null, "m1", "ops-ana", at)).toMatchObject({ version: "m1", shadow: null, previous: [] });
  });

  test("ends the shadow run when the shadow goes live, and keeps another shadow running", () => {
    expect(activatedPointer(pointer("m1", "m2", []), "m2", "ops-ana", at).shadow).toBeNull();
    expect(activatedPointer(pointer("m1", "m3", []), "m2", "ops-ana", at).shadow).toBe("m3");
  });

  test("lists each version once, drops the new live one from the list, and keeps at most the cap", () => {
    expect(activatedPointer(pointer("m3", null, ["m2", "m1", "m3"]), "m1", "ops-ana", at).previous).toEqual(["m3", "m2"]);
    const long = Array.from({ length: MAX_PREVIOUS_VERSIONS }, (_, i) => `old${i}`);
    const next = activatedPointer(pointer("m-live", null, long), "m-new", "ops-ana", at);
    expect(next.previous).toHaveLength(MAX_PREVIOUS_VERSIONS);
    expect(next.previous[0]).toBe("m-live");
  });
});
