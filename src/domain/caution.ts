/**
 * The one caution that goes with every finding, wherever it reaches a person or another system (board, e-mail,
 * acknowledgement page, webhook and MQTT data, command line, backtest report): the tool advises, people decide.
 */
export const ADVISORY_CAUTION =
  "wearshift advises: the laboratory's diagnosis, the equipment maker's limits, local codes and licensed practice decide.";

/** What a time-to-limit forecast rests on. */
export const FORECAST_CAUTION = 'A forecast assumes the present trend continues; wear can speed up or settle at any time.';
