/** Secrets are environment variable names in the configuration; a literal `whsec_` value is allowed for webhooks. */
import { DeliveryRefused } from './errors.ts';

export function secretFrom(ref: string, env: NodeJS.ProcessEnv, what: string): string {
  if (ref.startsWith('whsec_')) return ref;
  const value = env[ref];
  if (value === undefined || value === '') throw new DeliveryRefused(`${what}: environment variable ${ref} is not set`);
  return value;
}
