export * from './api-client.js';
export * from './push-documents.js';
