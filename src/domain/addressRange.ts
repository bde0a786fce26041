/**
 * IP addresses and CIDR ranges as the configuration names them (`http.trustedProxies`): `10.0.0.7`, `10.0.0.0/8`,
 * `::1`, `fd00::/8`. Pure, so the configuration schema can check them without the network stack.
 */

const OCTET = '(?:25[0-5]|2[0-4]\\d|1\\d\\d|[1-9]?\\d)';
const IPV4 = new RegExp(`^${OCTET}(?:\\.${OCTET}){3}$`);

function isIPv4(text: string): boolean {
  return IPV4.test(text);
}

function isIPv6(text: string): boolean {
  if (!text.includes(':') || !/^[0-9a-fA-F:.]+$/.test(text)) return false;
  // The URL parser implements the IPv6 address grammar (groups, one "::", a trailing IPv4 part).
  try {
    new URL(`http://[${text}]/`);
    return true;
  } catch {
    return false;
  }
}

/** What is wrong with `text` as an IP address or CIDR range; undefined when it is one. */
export function addressRangeProblem(text: string): string | undefined {
  const slash = text.indexOf('/');
  const address = slash === -1 ? text : text.slice(0, slash);
  const bits = isIPv4(address) ? 32 : isIPv6(address) ? 128 : undefined;
  if (bits === undefined) return `"${text}" is not an IP address or a CIDR range (such as 10.0.0.7, 10.0.0.0/8, fd00::/8)`;
  if (slash === -1) return undefined;
  const prefix = text.slice(slash + 1);
  if (!/^\d{1,3}$/.test(prefix) || Number(prefix) > bits) return `"${text}": the prefix length after "/" must be a whole number from 0 to ${bits}`;
  return undefined;
}
