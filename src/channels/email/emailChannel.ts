/** The e-mail channel: renders the incident message (with its chart and acknowledgement link) and sends it by SMTP. */
import { ackLinkUrl, signAckLink } from '../../notify/ackLink.ts';
import { asksForAcknowledgement } from '../../notify/message.ts';
import { renderFloodSummaryEmail } from './floodSummaryEmail.ts';
import type { Channels } from '../../domain/escalationConfig.ts';
import type { ChannelDefinition } from '../channel.ts';
import { DeliveryRefused, DeliveryRetry } from '../errors.ts';
import { ackLinkSecretRefs, secretFrom } from '../secrets.ts';
import { renderIncidentEmail, type RenderedEmail } from './emailRender.ts';
import { EmailDeliveryError, sendEmail } from './emailSend.ts';

type Smtp = NonNullable<Channels['email']>['smtp'];

function smtpTransport(smtp: Smtp, env: NodeJS.ProcessEnv) {
  return {
    host: smtp.host,
    port: smtp.port,
    ...(smtp.secure !== undefined && { secure: smtp.secure }),
    ...(smtp.user !== undefined && { auth: { user: smtp.user, pass: smtp.passwordEnv === undefined ? '' : secretFrom(smtp.passwordEnv, env, 'channels.email.smtp') } }),
  };
}

export const emailChannel: ChannelDefinition = {
  secretRefs: (channels) => [
    ...(channels.email?.smtp.passwordEnv === undefined ? [] : [{ ref: channels.email.smtp.passwordEnv, usedBy: 'channels.email.smtp (the SMTP password)' }]),
    // The acknowledgement links in e-mails are signed with it.
    ...(channels.email === undefined ? [] : ackLinkSecretRefs(channels)),
  ],
  configured: (channels) => channels.email !== undefined,
  open(channels, { env, timeZone }) {
    // Aborted by close(): an attempt in flight ends at once instead of holding a stopping worker up to its deadline.
    const closing = new AbortController();
    const inFlight = new Set<Promise<unknown>>();

    /** One attempt; its job is failed for a retry when the channel closes meanwhile, never recorded as sent. */
    async function send(smtp: Smtp, mail: RenderedEmail, what: string) {
      // No connection is made: the message was certainly not taken.
      if (closing.signal.aborted) throw new DeliveryRetry(`${what}: not sent, the e-mail channel is closed (the worker is stopping)`, undefined, true);
      const attempt = sendEmail(smtpTransport(smtp, env), mail, { deadlineMs: smtp.deadlineMs, signal: closing.signal });
      inFlight.add(attempt);
      try {
        return await attempt;
      } catch (e) {
        if (e instanceof EmailDeliveryError) throw e.retryable ? new DeliveryRetry(e.message, undefined, e.notTaken) : new DeliveryRefused(e.message);
        throw e;
      } finally {
        inFlight.delete(attempt);
      }
    }

    return {
      async deliver({ effect, message, chart }) {
        const cfg = channels.email;
        if (cfg === undefined) throw new DeliveryRefused('an e-mail notification, but channels.email is not configured');
        const links = channels.ackLinks;
        const ack =
          links !== undefined && asksForAcknowledgement(message)
            ? (() => {
                const expiresAt = new Date(Date.now() + links.ttlHours * 3_600_000);
                // The variable may list several secrets during a rotation; links are signed with the first.
                const secret = secretFrom(links.secretEnv, env, 'channels.ackLinks').split(',')[0]!.trim();
                const token = signAckLink({ incidentId: effect.incidentId, recipient: effect.target, expiresAt }, secret);
                return { ackUrl: ackLinkUrl(links.baseUrl, token), ackExpiresAt: expiresAt };
              })()
            : {};
        const mail = renderIncidentEmail(message, { from: cfg.from, to: effect.target, ...ack, ...(chart && { chart }), ...(timeZone !== undefined && { timeZone }) });
        const sent = await send(cfg.smtp, mail, `e-mail to ${effect.target}`);
        if (sent.accepted.length === 0) throw new DeliveryRefused(`e-mail to ${effect.target}: the server refused the recipient`);
        return `email ${effect.target}: ${sent.messageId}`;
      },
      async deliverSummary(s, _window, _attempt) {
        const cfg = channels.email;
        if (cfg === undefined) throw new DeliveryRefused('a flood summary by e-mail, but channels.email is not configured');
        // Its times in the site zone, as in the incident e-mails.
        const mail = renderFloodSummaryEmail(s, { from: cfg.from, to: s.target, ...(timeZone !== undefined && { timeZone }) });
        const sent = await send(cfg.smtp, mail, `flood summary to ${s.target}`);
        return `flood summary by email ${s.target}: ${s.held.length} held back, ${sent.messageId}`;
      },
      /**
       * Ends every attempt in flight (its connection closed, its delivery failed as retryable, so that the notify job
       * stays pending and runs again) and refuses new ones; resolves once the attempts have ended.
       */
      async close() {
        closing.abort();
        await Promise.allSettled([...inFlight]);
      },
    };
  },
};
