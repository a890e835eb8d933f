/** A layer id from a tensor or node name: the characters a network document allows, the last 64 of them. */
export const layerIdOf = (raw: string): string => raw.replace(/[^A-Za-z0-9._:/-]/g, '_').slice(-64) || 'node';
