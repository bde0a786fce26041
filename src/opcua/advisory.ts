/** The caution every alarm message carries to the control room. */
export const ADVISORY_TEXT = 'wearshift advises; the laboratory\u2019s diagnosis, the equipment maker\u2019s limits, local codes and licensed practice decide';
