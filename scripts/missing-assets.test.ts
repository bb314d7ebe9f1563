import { mkdirSync, mkdtempSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterEach, describe, expect, it } from "vitest";
import { missingAssetsDirectory } from "./missing-assets";

const folders: string[] = [];
function projectWith(wranglerToml: string): string {
  const root = mkdtempSync(join(tmpdir(), "isodense-assets-"));
  folders.push(root);
  writeFileSync(join(root, "wrangler.toml"), wranglerToml);
  return root;
}
afterEach(() => {
  for (const folder of folders.splice(0)) rmSync(folder, { recursive: true, force: true });
});

describe("missingAssetsDirectory", () => {
  const withAssets = 'name = "x"\n\n[assets]\ndirectory = "review-ui/dist"\nbinding = "ASSETS"\n\n[vars]\ndirectory = "not-this"\n';

  it("names the [assets] folder while it does not exist", () => {
    expect(missingAssetsDirectory(projectWith(withAssets))).toBe("review-ui/dist");
  });

  it("is null once the folder exists", () => {
    const root = projectWith(withAssets);
    mkdirSync(join(root, "review-ui/dist"), { recursive: true });
    expect(missingAssetsDirectory(root)).toBeNull();
  });

  it("is null when wrangler.toml serves no assets, whatever other sections call a directory", () => {
    expect(missingAssetsDirectory(projectWith('name = "x"\n\n[vars]\ndirectory = "absent"\n'))).toBeNull();
  });

  it("reads the project's own wrangler.toml: its assets are the review app's build", () => {
    const root = join(import.meta.dirname, "..");
    expect([null, "review-ui/dist"]).toContain(missingAssetsDirectory(root));
  });
});
