/** Types of eslint/layers.js, for the test of the rule. */
export declare const LAYERS: Readonly<Record<string, readonly string[]>>;
declare const plugin: { rules: Record<string, unknown> };
export default plugin;
