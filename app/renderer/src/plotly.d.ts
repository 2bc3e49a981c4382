/** The part of plotly.js-dist-min's API the screens use (the package ships no types). */
declare module 'plotly.js-dist-min' {
  type Data = Record<string, unknown>;
  type Layout = Record<string, unknown>;
  type Config = Record<string, unknown>;
  const Plotly: {
    react(root: HTMLElement, data: Data[], layout?: Layout, config?: Config): Promise<HTMLElement>;
    purge(root: HTMLElement): void;
    Plots: { resize(root: HTMLElement): void };
  };
  export default Plotly;
}
