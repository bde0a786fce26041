/**
 * `{name}` placeholders of configured addresses (the CloudEvents source, the MQTT topic): the fields they may name,
 * and the check of a CloudEvents source template made when the configuration is read. Filling a template is
 * src/notify/template.ts's.
 */

export const TEMPLATE_FIELDS = ['unit', 'component', 'group', 'severity', 'type'] as const;
export type TemplateField = (typeof TEMPLATE_FIELDS)[number];

/** The CloudEvents `source` of incident events when the channel names none. */
export const DEFAULT_SOURCE_TEMPLATE = '/wearshift/{unit}/{component}';

const PLACEHOLDER = /\{([^{}]*)\}/g;

/** The placeholders of `template` that name no field, as written (`{site}`), in order, each once. */
export function unknownPlaceholders(template: string): string[] {
  const unknown = [...template.matchAll(PLACEHOLDER)].map(([p, name]) => ({ p, name: name ?? '' })).filter(({ name }) => !(TEMPLATE_FIELDS as readonly string[]).includes(name));
  return [...new Set(unknown.map(({ p }) => p))];
}

export function knownPlaceholdersText(): string {
  return TEMPLATE_FIELDS.map((f) => `{${f}}`).join(' ');
}

// RFC 3986: the characters of each part of a URI reference (unreserved, sub-delims and percent-encodings).
const PCT = '%[0-9A-Fa-f]{2}';
const PLAIN = "A-Za-z0-9\\-._~!$&'()*+,;=";
const only = (chars: string) => new RegExp(`^(?:[${chars}]|${PCT})*$`);
const USERINFO = only(`${PLAIN}:`);
const REG_NAME = only(PLAIN);
const IP_LITERAL = new RegExp(`^\\[(?:[0-9A-Fa-f:.]+|[vV][0-9A-Fa-f]+\\.[${PLAIN}:]+)\\]$`);
const PATH = only(`${PLAIN}:@/`);
const QUERY_OR_FRAGMENT = only(`${PLAIN}:@/?`);
const SCHEME = /^[A-Za-z][A-Za-z0-9+.-]*$/;
/** RFC 3986 appendix B: scheme, authority, path, query, fragment. */
const PARTS = /^(?:([^:/?#]+):)?(?:\/\/([^/?#]*))?([^?#]*)(?:\?([^#]*))?(?:#(.*))?$/s;
const URI_CHAR = new RegExp(`[${PLAIN}:@/?#\\[\\]%]`);

/**
 * Why the template cannot serve as a CloudEvents `source` (a phrase to follow the template: "is …", "holds …"), or
 * undefined when it can: it must name known fields only and, whatever names fill it, give a non-empty URI reference
 * (RFC 3986). Each value is filled in percent-encoded (src/notify/cloudEvent.ts), so a placeholder stands for
 * letters, digits and percent-encodings: it may sit in a path, a query, a fragment, a host or user information,
 * never in a scheme or a port.
 */
export function sourceTemplateProblem(template: string): string | undefined {
  if (template === '') return 'is empty: a CloudEvent needs a source';
  const unknown = unknownPlaceholders(template);
  if (unknown.length > 0) return `names ${unknown.length === 1 ? 'an unknown placeholder' : 'unknown placeholders'} ${unknown.join(' ')}; known: ${knownPlaceholdersText()}`;
  // Every placeholder as a value of its kind would come out: a percent-encoding, never a scheme's or a port's.
  const filled = template.replace(PLACEHOLDER, '%41');
  if (/[{}]/.test(filled)) return 'holds a "{" or "}" that does not enclose a placeholder';
  const stray = [...filled].find((c) => !URI_CHAR.test(c));
  if (stray !== undefined) return `holds ${JSON.stringify(stray)}, which a URI reference does not allow; write it percent-encoded (${percentEncoded(stray)})`;
  if (/%(?![0-9A-Fa-f]{2})/.test(filled)) return 'holds a "%" that does not start a percent-encoding such as %20';
  const [, scheme, authority, path = '', query, fragment] = PARTS.exec(filled)!;
  if (scheme !== undefined && !SCHEME.test(scheme)) {
    return `is not a URI reference: what comes before the first ":" must be a scheme (a letter, then letters, digits, "+", "-" or "."; no placeholder), or the reference must start with "/" or "./" (RFC 3986)`;
  }
  if (authority !== undefined) {
    const [, userinfo, host = '', port] = /^(?:([^@]*)@)?(\[[^\]]*\]|[^:]*)(?::(.*))?$/s.exec(authority) ?? [];
    if (userinfo !== undefined && !USERINFO.test(userinfo)) return `is not a URI reference: the user information "${userinfo}" before "@" holds a character it may not (RFC 3986)`;
    if (!(host.startsWith('[') ? IP_LITERAL.test(host) : REG_NAME.test(host))) return `is not a URI reference: the host after "//" holds a character it may not ("[" and "]" only around an IP address; RFC 3986)`;
    if (port !== undefined && !/^\d*$/.test(port)) return 'is not a URI reference: the port after the host must be digits (no placeholder)';
  }
  if (!PATH.test(path)) return 'is not a URI reference: "[", "]" or "#" where a path may not hold them (RFC 3986)';
  if (query !== undefined && !QUERY_OR_FRAGMENT.test(query)) return 'is not a URI reference: "[", "]" or "#" in the query (RFC 3986)';
  if (fragment !== undefined && !QUERY_OR_FRAGMENT.test(fragment)) return 'is not a URI reference: "[", "]" or a second "#" in the fragment (RFC 3986)';
  return undefined;
}

function percentEncoded(c: string): string {
  return [...new TextEncoder().encode(c)].map((b) => `%${b.toString(16).toUpperCase().padStart(2, '0')}`).join('');
}
