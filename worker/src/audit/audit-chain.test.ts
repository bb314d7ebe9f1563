import { describe, expect, test } from "vitest";
import { chainLink, checkEvents, eventDigest, GENESIS, type StoredEvent } from "./audit-chain";

/** A sealed chain of `n` invented events, as the sealer would write them. */
async function sealedChain(n: number): Promise<StoredEvent[]> {
  const events: StoredEvent[] = [];
  let previous = GENESIS;
  for (let id = 1; id <= n; id++) {
    const content = {
      id,
      item_id: 10 + (id % 3),
      at: new Date(Date.UTC(2026, 11, 4, 9, id)).toISOString(),
      actor: id % 2 ? "rosa" : "idris",
      action: id % 2 ? "claim" : "decide",
      from_outcome: null,
      to_outcome: id % 2 ? null : "fraud",
      note: id % 2 ? null : `note ${id}`,
      model_version: "m1",
    };
    const digest = await eventDigest(content);
    const chain = await chainLink(previous, digest);
    events.push({ ...content, digest, chain, erased_at: null, erased_by: null });
    previous = chain;
  }
  return events;
}

/** The event turned into a tombstone as erasure writes it. */
function tombstone(event: StoredEvent): StoredEvent {
  return {
    ...event,
    item_id: null,
    actor: null,
    from_outcome: null,
    to_outcome: null,
    note: null,
    model_version: null,
    erased_at: "2026-12-05T00:00:00.000Z",
    erased_by: "erasure",
  };
}

describe("checking the audit chain", () => {
  test("an untouched chain verifies and the cursor ends at its last event", async () => {
    const events = await sealedChain(6);
    const checked = await checkEvents(null, events);
    expect(checked.broken).toBeNull();
    expect(checked.cursor).toEqual({ id: 6, chain: events[5].chain });
  });

  test("a chain checked in pages verifies as it does in one piece", async () => {
    const events = await sealedChain(6);
    const first = await checkEvents(null, events.slice(0, 2));
    const second = await checkEvents(first.cursor, events.slice(2));
    expect(second).toEqual(await checkEvents(null, events));
  });

  test("tombstones keep the chain whole: erasure is not taken for tampering", async () => {
    const events = await sealedChain(6);
    const erased = events.map((e) => (e.id === 2 || e.id === 4 ? tombstone(e) : e));
    const checked = await checkEvents(null, erased);
    expect(checked.broken).toBeNull();
    expect(checked.tombstones).toBe(2);
  });

  test("a changed note is named as changed content at its own event", async () => {
    const events = await sealedChain(6);
    events[3] = { ...events[3], note: "looked fine" };
    expect((await checkEvents(null, events)).broken).toMatchObject({ eventId: 4, kind: "content-changed" });
  });

  test("a tombstone whose digest was swapped breaks the link at that event", async () => {
    const events = await sealedChain(6);
    events[2] = { ...tombstone(events[2]), digest: "f".repeat(64) };
    expect((await checkEvents(null, events)).broken).toMatchObject({ eventId: 3, kind: "link-broken" });
  });

  test("a removed event is named by the range that is missing", async () => {
    const events = await sealedChain(6);
    const broken = (await checkEvents(null, [...events.slice(0, 2), ...events.slice(4)])).broken;
    expect(broken).toMatchObject({ eventId: 5, kind: "events-missing" });
    expect(broken?.explanation).toContain("events 3 to 4 are missing");
  });

  test("removing the first events is found too", async () => {
    const events = await sealedChain(4);
    expect((await checkEvents(null, events.slice(1))).broken).toMatchObject({ eventId: 2, kind: "events-missing" });
  });

  test("a forged event with recomputed digests breaks the link of the event after it", async () => {
    const events = await sealedChain(6);
    const forged = { ...events[1], note: "nothing to see" };
    forged.digest = await eventDigest(forged);
    forged.chain = await chainLink(events[0].chain!, forged.digest);
    events[1] = forged;
    expect((await checkEvents(null, events)).broken).toMatchObject({ eventId: 3, kind: "link-broken" });
  });
});
