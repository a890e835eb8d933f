import { useEffect, useMemo, useState } from 'preact/hooks';
import { createConsoleClient, fetchWhoAmI, type WhoAmI } from './api.js';
import { SessionContext, type ConsoleSession } from './context.js';
import { createLiveFeed, type LiveStatus } from './live.js';
import { AuditPage } from './pages/audit.js';
import { DevicePage } from './pages/device.js';
import { FleetPage } from './pages/fleet.js';
import { LoginPage } from './pages/login.js';
import { PlannerPage } from './pages/planner.js';
import { ProfileEditorPage } from './pages/profile-editor.js';
import { ProfilesPage } from './pages/profiles.js';
import { ReleasesPage } from './pages/releases.js';
import { href, useHashPlace, type Place } from './router.js';
import { clearToken, loadToken, saveToken } from './session.js';

const NAV: Array<{ label: string; place: Place; pages: Place['page'][] }> = [
  { label: 'Fleet', place: { page: 'fleet' }, pages: ['fleet', 'device'] },
  { label: 'Profiles', place: { page: 'profiles' }, pages: ['profiles', 'profile'] },
  { label: 'Planner', place: { page: 'planner' }, pages: ['planner'] },
  { label: 'Releases & rollouts', place: { page: 'releases' }, pages: ['releases'] },
  { label: 'Audit', place: { page: 'audit' }, pages: ['audit'] },
];

function LiveIndicator({ status }: { status: LiveStatus }) {
  const text = status === 'live' ? 'live updates on' : status === 'connecting' ? 'connecting…' : 'live updates lost, retrying…';
  return (
    <span class={`live live-${status}`} role="status" aria-live="polite">
      <span aria-hidden="true">{status === 'live' ? '◉' : '◌'}</span> {text}
    </span>
  );
}

function Page({ place }: { place: Place }) {
  switch (place.page) {
    case 'fleet':
      return <FleetPage />;
    case 'device':
      return <DevicePage deviceId={place.deviceId} />;
    case 'profiles':
      return <ProfilesPage />;
    case 'profile':
      return <ProfileEditorPage profileId={place.profileId} />;
    case 'planner':
      return <PlannerPage taskId={place.taskId} deviceClassId={place.deviceClassId} />;
    case 'releases':
      return <ReleasesPage />;
    case 'audit':
      return <AuditPage />;
  }
}

function Console({ token, who, onSignOut }: { token: string; who: WhoAmI; onSignOut: () => void }) {
  const place = useHashPlace();
  const session = useMemo<ConsoleSession>(() => {
    const api = createConsoleClient(token, onSignOut);
    const allowed = new Set(who.allowed);
    return { api, who, can: (key) => allowed.has(key), live: createLiveFeed(api) };
  }, [token, who]);
  const [liveStatus, setLiveStatus] = useState<LiveStatus>(session.live.status());
  useEffect(() => {
    const stop = session.live.onStatus(setLiveStatus);
    return () => {
      stop();
      session.live.close();
    };
  }, [session]);
  useEffect(() => {
    const current = NAV.find((n) => n.pages.includes(place.page));
    document.title = `${current?.label ?? 'Console'} · Ocellus`;
    document.getElementById('main')?.focus({ preventScroll: true });
  }, [place.page]);

  return (
    <SessionContext.Provider value={session}>
      <a class="skip" href="#main">
        Skip to content
      </a>
      <header class="top">
        <div class="brand">
          <span class="brand-mark" aria-hidden="true">◎</span> Ocellus <span class="brand-sub">console</span>
        </div>
        <nav aria-label="Pages">
          <ul>
            {NAV.map((n) => (
              <li>
                <a href={href(n.place)} aria-current={n.pages.includes(place.page) ? 'page' : undefined}>
                  {n.label}
                </a>
              </li>
            ))}
          </ul>
        </nav>
        <div class="who">
          <LiveIndicator status={liveStatus} />
          <span class="role" title={who.actor}>
            {who.label} · <strong>{who.role}</strong>
          </span>
          <button type="button" class="btn btn-quiet" onClick={onSignOut}>
            Sign out
          </button>
        </div>
      </header>
      <main id="main" tabIndex={-1}>
        <Page place={place} />
      </main>
    </SessionContext.Provider>
  );
}

export function App() {
  const [auth, setAuth] = useState<{ token: string; who: WhoAmI } | null>(null);
  const [checking, setChecking] = useState(() => loadToken() !== null);

  useEffect(() => {
    const token = loadToken();
    if (!token) return;
    fetchWhoAmI(token).then(
      (who) => {
        setAuth({ token, who });
        setChecking(false);
      },
      () => {
        clearToken();
        setChecking(false);
      },
    );
  }, []);

  if (checking) return <p class="muted pad">Checking the saved token…</p>;
  if (!auth) {
    return (
      <LoginPage
        onSignedIn={(token, who) => {
          saveToken(token);
          setAuth({ token, who });
        }}
      />
    );
  }
  return (
    <Console
      token={auth.token}
      who={auth.who}
      onSignOut={() => {
        clearToken();
        setAuth(null);
      }}
    />
  );
}
