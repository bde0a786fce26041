/**
 * wearshift's public entry point for integrators (`import … from 'wearshift'`):
 * - the result producer, to feed lab results from Node.js code;
 * - the result event's schema (zod) and types, to check records before sending them;
 * - the webhook verification helper, to check a delivery's Standard Webhooks signature.
 *
 * Anything else under src/ is internal and may change without notice. The findings these carry advise; the lab's
 * diagnosis, the equipment maker's limits, local codes and licensed practice decide.
 */
export { createResultProducer, type ResultProducer, type ResultProducerOptions } from './queue/producer.ts';
export { parseResultEvent, ResultEventSchema, type FieldIssue, type ParsedEvent, type ResultEvent, type Sample } from './domain/event.ts';
export type { RecordOutcome } from './intake/validate.ts';
export { DEFAULT_WEBHOOK_TOLERANCE_SECONDS, verifyWebhook, type WebhookHeaders, type WebhookRefusal } from './channels/webhook/webhookSignature.ts';
export { ADVISORY_CAUTION } from './domain/caution.ts';
