/** The theme's colours as canvas styles, read from the CSS variables of main.css. */
export interface ChartColors { ink: string, muted: string, line: string, accent: string, good: string, warn: string, bad: string, surface: string }

/** A picked peak as the spectrum plot marks it. */
export interface PlotPeak { centroid: number, label: string | null }

/** Reads the theme's colours for a canvas (canvas cannot use CSS variables itself). */
export function themeColors(): ChartColors {
  const style = getComputedStyle(document.documentElement)
  const v = (name: string) => `rgb(${style.getPropertyValue(`--aw-${name}`).trim().replace(/\s+/g, ', ')})`
  return { ink: v('ink'), muted: v('muted'), line: v('line'), accent: v('accent'), good: v('good'), warn: v('warn'), bad: v('bad'), surface: v('surface') }
}

/** Distinct series colours for several labs, readable on light and dark (common practice, no source). */
export const seriesPalette = ['#0e6b6e', '#b5651d', '#5b5fc7', '#2f8f3a', '#b0306a', '#7a6f1e', '#1f77b4', '#8c564b']
