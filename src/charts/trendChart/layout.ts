/** The trend chart's shared geometry: margins, gaps and font, and the frame of one panel on the page. */
import type { ScaleLinear } from 'd3-scale';

/** A level this far above the data or less is drawn; one further away is named at the panel's top instead. */
export const NEAR_LIMIT = 1.6;
/** DejaVu Sans, the font the PNG renderer loads (chartPng.ts), with fallbacks for a browser that lacks it. */
export const FONT = 'DejaVu Sans, Verdana, Arial, sans-serif';
/** Room left of the plots for the value ticks and right of them for the level labels. */
export const MARGIN = { left: 62, right: 112 };
/** Vertical space between panels, which holds each panel's heading. */
export const PANEL_GAP = 34;
/** How far each further mark at one sample is lifted above the one before. */
export const STACK_STEP = 15;

/** Where one panel stands on the page and its value scale. */
export interface Frame {
  readonly top: number;
  readonly height: number;
  readonly y: ScaleLinear<number, number>;
}

/** One value of a series at its sampling time, as the line paths take it. */
export interface Point {
  readonly sampleId: string;
  readonly time: number;
  readonly value: number;
}
