import { useEffect, useState } from 'preact/hooks';

/** The console's places; hash links, so any deep link works from the one index.html the server sends. */
export type Place =
  | { page: 'fleet' }
  | { page: 'device'; deviceId: string }
  | { page: 'profiles' }
  | { page: 'profile'; profileId: string }
  | { page: 'planner'; taskId?: string; deviceClassId?: string }
  | { page: 'releases' }
  | { page: 'audit' };

export function parsePlace(hash: string): Place {
  const parts = hash.replace(/^#\/?/, '').split('/').filter(Boolean).map(decodeURIComponent);
  const [first, second] = parts;
  if (first === 'devices' && second) return { page: 'device', deviceId: second };
  if (first === 'profiles' && second) return { page: 'profile', profileId: second };
  if (first === 'profiles') return { page: 'profiles' };
  if (first === 'planner') return { page: 'planner', ...(second ? { taskId: second } : {}), ...(parts[2] ? { deviceClassId: parts[2] } : {}) };
  if (first === 'releases') return { page: 'releases' };
  if (first === 'audit') return { page: 'audit' };
  return { page: 'fleet' };
}

export function href(place: Place): string {
  switch (place.page) {
    case 'device':
      return `#/devices/${encodeURIComponent(place.deviceId)}`;
    case 'profile':
      return `#/profiles/${encodeURIComponent(place.profileId)}`;
    case 'planner':
      return place.taskId && place.deviceClassId ? `#/planner/${encodeURIComponent(place.taskId)}/${encodeURIComponent(place.deviceClassId)}` : '#/planner';
    default:
      return `#/${place.page}`;
  }
}

export function useHashPlace(): Place {
  const [place, setPlace] = useState(() => parsePlace(location.hash));
  useEffect(() => {
    const onHash = () => setPlace(parsePlace(location.hash));
    addEventListener('hashchange', onHash);
    return () => removeEventListener('hashchange', onHash);
  }, []);
  return place;
}
