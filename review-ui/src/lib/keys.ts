/**
 * The keyboard map, in one list so the help overlay and the handler cannot drift apart.
 */
export type Command = "down" | "up" | "open" | "back" | "claim" | "release" | "fraud" | "legitimate" | "note" | "account" | "undo" | "help" | "next-page" | "previous-page";

export interface KeyBinding {
  keys: string[];
  command: Command;
  meaning: string;
}

export const BINDINGS: readonly KeyBinding[] = [
  { keys: ["j", "ArrowDown"], command: "down", meaning: "Next payment" },
  { keys: ["k", "ArrowUp"], command: "up", meaning: "Previous payment" },
  { keys: ["Enter"], command: "open", meaning: "Open the evidence" },
  { keys: ["Escape"], command: "back", meaning: "Back to the queue / close" },
  { keys: ["c"], command: "claim", meaning: "Claim the payment" },
  { keys: ["r"], command: "release", meaning: "Release your claim" },
  { keys: ["f"], command: "fraud", meaning: "Confirm as fraud (claims it first if needed)" },
  { keys: ["l"], command: "legitimate", meaning: "Dismiss as legitimate (claims it first if needed)" },
  { keys: ["n"], command: "note", meaning: "Write a note, then decide" },
  { keys: ["a"], command: "account", meaning: "See the account's open flags together and decide them in one go" },
  { keys: ["u"], command: "undo", meaning: "Undo your last decision" },
  { keys: ["]"], command: "next-page", meaning: "Next page" },
  { keys: ["["], command: "previous-page", meaning: "Previous page" },
  { keys: ["?"], command: "help", meaning: "Show or hide this list" },
];

const byKey = new Map<string, Command>(BINDINGS.flatMap((b) => b.keys.map((k) => [k, b.command] as const)));

/** Shown name of a key. */
export function keyLabel(key: string): string {
  return ({ ArrowDown: "↓", ArrowUp: "↑", Escape: "Esc" } as Record<string, string>)[key] ?? key;
}

/**
 * The command for a key press, or null when the press belongs to a text field or uses a modifier
 * (so browser shortcuts keep working).
 */
export function commandFor(event: KeyboardEvent): Command | null {
  if (event.ctrlKey || event.metaKey || event.altKey) return null;
  const target = event.target as HTMLElement | null;
  if (target && (target.isContentEditable || ["INPUT", "TEXTAREA", "SELECT"].includes(target.tagName))) return null;
  // Enter on a focused button or link is that control's own action.
  if (event.key === "Enter" && target && ["BUTTON", "A"].includes(target.tagName)) return null;
  return byKey.get(event.key) ?? null;
}
