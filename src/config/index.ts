export { configSchema, SECRET_PATHS, type Config } from './schema.js';
export { loadConfig, redactConfig, formatIssues, ENV_BINDINGS, PACKAGE_ROOT, type LoadConfigOptions } from './load.js';
export { configReference } from './reference.js';
