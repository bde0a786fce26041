/**
 * Thrown by a month's judgement (monthlyJudgement.ts) when a result of an earlier month it waited for has come to the
 * caller's own next batch (a dead worker's job taken again by this process): the batch ends uncommitted (its
 * components stay due) and is judged again together with that result, month by month (resultBatches.ts).
 */
export class RegroupBatch extends Error {
  override readonly name = 'RegroupBatch';
  constructor(readonly month: string) {
    super(`the batch is judged again with results of months before ${month} that came to this process meanwhile`);
  }
}
