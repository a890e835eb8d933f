export * from './units.js';
export * from './optics.js';
export * from './luminosity.js';
export * from './exposure.js';
export * from './sensor.js';
export * from './motion.js';
export * from './network-cost.js';
