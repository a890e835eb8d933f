/** The token lives in sessionStorage: it is gone when the tab closes and never sent anywhere but the API. */
const KEY = 'ocellus.console.token';

export function loadToken(): string | null {
  try {
    return sessionStorage.getItem(KEY);
  } catch {
    return null;
  }
}

export function saveToken(token: string): void {
  sessionStorage.setItem(KEY, token);
}

export function clearToken(): void {
  sessionStorage.removeItem(KEY);
}
