/**
 * OPC UA user-name tokens mapped to wearshift roles. Passwords come from the environment (never from the
 * configuration file) and are compared over digests in constant time, as the HTTP bearer tokens are.
 */
import { createHash, timingSafeEqual } from 'node:crypto';
import type { OpcuaConfig } from '../domain/opcuaConfig.ts';
import { InputError } from '../domain/errors.ts';

export type OpcuaRole = 'viewer' | 'responder';

interface UserEntry {
  readonly userName: string;
  readonly digest: Buffer;
  readonly role: OpcuaRole;
}

const digest = (s: string) => createHash('sha256').update(s).digest();

export class OpcuaUsers {
  private readonly users: readonly UserEntry[];

  constructor(
    private readonly config: Pick<OpcuaConfig, 'users' | 'anonymous'>,
    env: NodeJS.ProcessEnv,
  ) {
    this.users = config.users.map((u) => {
      const password = env[u.passwordEnv];
      if (password === undefined || password === '') throw new InputError(`opcua.users: ${u.passwordEnv} (the password of "${u.userName}") is not set`);
      return { userName: u.userName, digest: digest(password), role: u.role };
    });
  }

  /** Checks a user name and password; every entry is compared, so timing tells nothing. */
  isValidUser(userName: string, password: string): boolean {
    const d = digest(password);
    let ok = false;
    for (const u of this.users) if (timingSafeEqual(d, u.digest) && u.userName === userName) ok = true;
    return ok;
  }

  /** The role of a session's user; undefined for an anonymous session (see `anonymous`). */
  roleOf(userName: string | undefined): OpcuaRole | undefined {
    if (userName === undefined || userName === '' || userName === 'anonymous') return this.config.anonymous === 'viewer' ? 'viewer' : undefined;
    return this.users.find((u) => u.userName === userName)?.role;
  }
}
