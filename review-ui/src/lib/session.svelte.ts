/**
 * Who is signed in. The personal credential is kept in sessionStorage only, so it disappears with
 * the tab and is never written to disk by the app.
 */
import { ApiError, useCredential, whenUnauthorized, whoAmI } from "./api";
import type { WhoAmI } from "@contract";

const STORAGE_KEY = "isodense.review.credential";

export class Session {
  me = $state<WhoAmI | null>(null);
  /** True while a stored credential is being checked at start-up. */
  checking = $state(false);
  error = $state<string | null>(null);

  constructor() {
    whenUnauthorized(() => this.forget("This credential was not accepted. Sign in again."));
  }

  /** Restores a credential left in this tab's sessionStorage, if any. */
  async restore(): Promise<void> {
    const stored = sessionStorage.getItem(STORAGE_KEY);
    if (!stored) return;
    this.checking = true;
    await this.signIn(stored);
    this.checking = false;
  }

  /** Checks the credential against the API and keeps it when accepted. */
  async signIn(credential: string): Promise<boolean> {
    const token = credential.trim();
    if (!token) {
      this.error = "Paste your personal credential first.";
      return false;
    }
    useCredential(token);
    try {
      this.me = await whoAmI();
      sessionStorage.setItem(STORAGE_KEY, token);
      this.error = null;
      return true;
    } catch (err) {
      this.forget(err instanceof ApiError ? err.message : "Sign-in failed.");
      return false;
    }
  }

  signOut(): void {
    this.forget(null);
  }

  private forget(reason: string | null): void {
    sessionStorage.removeItem(STORAGE_KEY);
    useCredential(null);
    this.me = null;
    this.error = reason;
  }
}

export const session = new Session();
