import { useState } from 'preact/hooks';
import { fetchWhoAmI, type WhoAmI } from '../api.js';

/** Sign in with an API token; it is checked against the server before it is kept for this tab. */
export function LoginPage({ onSignedIn }: { onSignedIn: (token: string, who: WhoAmI) => void }) {
  const [token, setToken] = useState('');
  const [error, setError] = useState<string | null>(null);
  const [busy, setBusy] = useState(false);

  async function submit(e: Event) {
    e.preventDefault();
    const t = token.trim();
    if (!t) {
      setError('Paste an API token first.');
      return;
    }
    setBusy(true);
    setError(null);
    try {
      onSignedIn(t, await fetchWhoAmI(t));
    } catch (err) {
      setError(`That token was not accepted: ${(err as Error).message}`);
    } finally {
      setBusy(false);
    }
  }

  return (
    <main class="login" id="main">
      <form class="login-card" onSubmit={submit} aria-labelledby="login-title">
        <h1 id="login-title">
          <span class="brand-mark" aria-hidden="true">◎</span> Ocellus console
        </h1>
        <p class="muted">Camera and compute profiles for the robot fleet. Sign in with an API token (an admin makes one with <code>ocellus token create</code>).</p>
        <label for="token">API token</label>
        <input id="token" name="token" type="password" autocomplete="off" value={token} onInput={(e) => setToken(e.currentTarget.value)} required />
        <p class="hint">Kept for this browser tab only (session storage) and sent only to this server.</p>
        {error && (
          <p class="note note-error" role="alert">
            {error}
          </p>
        )}
        <button type="submit" class="btn btn-primary" disabled={busy}>
          {busy ? 'Checking…' : 'Sign in'}
        </button>
      </form>
    </main>
  );
}
