#!/usr/bin/env bash
# Regenerates worker/worker-configuration.d.ts from wrangler.toml (`npm run env-types`) and fails
# when the checked-in file differed: the worker's `Env` must always match its configuration.
# (`wrangler types --check` compares only a hash and ignores --env-file, so it cannot be used here.)
set -euo pipefail
cd "$(dirname "$0")/.."
file=worker/worker-configuration.d.ts
before=$(mktemp)
trap 'rm -f "$before"' EXIT
cp "$file" "$before" 2>/dev/null || : >"$before"
npm run --silent env-types >/dev/null 2>&1 || { echo "wrangler types failed: run npm run env-types to see why"; exit 1; }
if ! cmp -s "$before" "$file"; then
  diff -u "$before" "$file" || true
  echo "$file was out of date with wrangler.toml; it has been regenerated: review and commit it"
  exit 1
fi
echo "$file matches wrangler.toml"
