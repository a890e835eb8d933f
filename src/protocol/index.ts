export * from './canonical-json.js';
export * from './topics.js';
export * from './limits.js';
export * from './release.js';
export * from './signing.js';
export * from './messages.js';
export * from './decode.js';
export * from './verify-release.js';
