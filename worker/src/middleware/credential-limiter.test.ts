import { describe, expect, test } from "vitest";
import { clientKey, CredentialFailureLimiter } from "./credential-limiter";

describe("CredentialFailureLimiter", () => {
  test("limits a client at its fifth failure within the window and frees it when the oldest failure leaves", () => {
    const limiter = new CredentialFailureLimiter(5, 60_000);
    const t0 = 1_000_000;
    for (let i = 0; i < 4; i++) limiter.recordFailure("203.0.113.7", t0 + i * 1000);
    expect(limiter.check("203.0.113.7", t0 + 4000)).toEqual({ limited: false });
    limiter.recordFailure("203.0.113.7", t0 + 4000);
    // Oldest failure at t0 leaves the window at t0 + 60 s: 56 s from t0 + 4 s.
    expect(limiter.check("203.0.113.7", t0 + 4000)).toEqual({ limited: true, retryAfterSeconds: 56, failures: 5 });
    expect(limiter.check("203.0.113.7", t0 + 59_500)).toEqual({ limited: true, retryAfterSeconds: 1, failures: 5 });
    expect(limiter.check("203.0.113.7", t0 + 60_000)).toEqual({ limited: false });
  });

  test("counts each client apart", () => {
    const limiter = new CredentialFailureLimiter(2, 60_000);
    limiter.recordFailure("198.51.100.1", 0);
    limiter.recordFailure("198.51.100.1", 1);
    expect(limiter.check("198.51.100.1", 2).limited).toBe(true);
    expect(limiter.check("198.51.100.2", 2).limited).toBe(false);
  });

  test("slides: failures spread wider than the window never limit", () => {
    const limiter = new CredentialFailureLimiter(3, 10_000);
    for (let i = 0; i < 100; i++) {
      limiter.recordFailure("192.0.2.9", i * 5_000);
      expect(limiter.check("192.0.2.9", i * 5_000).limited, `failure ${i}`).toBe(false);
    }
  });

  test("remembers at most maxClients clients, forgetting the least recently failing first", () => {
    const limiter = new CredentialFailureLimiter(1, 60_000, 3);
    for (const ip of ["a", "b", "c", "d"]) limiter.recordFailure(ip, 0);
    expect(limiter.trackedClients).toBe(3);
    expect(limiter.check("a", 1).limited).toBe(false);
    expect(limiter.check("d", 1).limited).toBe(true);
  });
});

describe("clientKey", () => {
  test("uses cf-connecting-ip and puts requests without it in one bucket", () => {
    expect(clientKey(new Headers({ "cf-connecting-ip": " 203.0.113.7 " }))).toBe("203.0.113.7");
    expect(clientKey(new Headers())).toBe("unidentified");
    expect(clientKey(new Headers({ "cf-connecting-ip": "x".repeat(65) }))).toBe("unidentified");
  });

  test("buckets IPv6 addresses by their /64 in one canonical spelling, and reads IPv4-mapped ones as IPv4", () => {
    const key = (ip: string) => clientKey(new Headers({ "cf-connecting-ip": ip }));
    for (const ip of ["2001:db8:1:2::1", "2001:db8:1:2:ffff:ffff:ffff:ffff", "2001:0DB8:0001:0002:0:0:0:9", "2001:db8:1:2::a%eth0", "2001:db8:1:2:0:0:192.0.2.1"]) {
      expect(key(ip), ip).toBe("2001:db8:1:2::/64");
    }
    expect(key("2001:db8:1:3::1")).toBe("2001:db8:1:3::/64");
    expect(key("::1")).toBe("0:0:0:0::/64");
    expect(key("2001:db8::")).toBe("2001:db8:0:0::/64");
    expect(key("::ffff:203.0.113.7")).toBe("203.0.113.7");
    for (const bad of ["2001:db8::1::2", "2001:db8:1:2:3:4:5:6:7", "2001:db8:zz::1", "1:2:3"]) expect(key(bad), bad).toBe("unidentified");
  });
});
