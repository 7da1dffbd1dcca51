import type { Config } from 'tailwindcss'

// Arcwise design tokens. Colours are named by role, not by hue, so light and dark
// themes swap values through CSS variables set in app/assets/css/main.css.
export default {
  darkMode: 'class',
  content: ['./app/**/*.{vue,ts}', './shared/**/*.ts'],
  theme: {
    extend: {
      colors: {
        canvas: 'rgb(var(--aw-canvas) / <alpha-value>)',
        surface: 'rgb(var(--aw-surface) / <alpha-value>)',
        raised: 'rgb(var(--aw-raised) / <alpha-value>)',
        line: 'rgb(var(--aw-line) / <alpha-value>)',
        ink: 'rgb(var(--aw-ink) / <alpha-value>)',
        muted: 'rgb(var(--aw-muted) / <alpha-value>)',
        accent: 'rgb(var(--aw-accent) / <alpha-value>)',
        'accent-ink': 'rgb(var(--aw-accent-ink) / <alpha-value>)',
        good: 'rgb(var(--aw-good) / <alpha-value>)',
        warn: 'rgb(var(--aw-warn) / <alpha-value>)',
        bad: 'rgb(var(--aw-bad) / <alpha-value>)',
      },
      fontFamily: {
        sans: ['Inter', 'system-ui', 'sans-serif'],
        mono: ['"JetBrains Mono"', 'ui-monospace', 'monospace'],
      },
      fontSize: {
        // A 1.2 ratio scale from a 15 px body size.
        'aw-xs': ['0.75rem', { lineHeight: '1.1rem' }],
        'aw-sm': ['0.8125rem', { lineHeight: '1.25rem' }],
        'aw-base': ['0.9375rem', { lineHeight: '1.5rem' }],
        'aw-lg': ['1.125rem', { lineHeight: '1.6rem' }],
        'aw-xl': ['1.35rem', { lineHeight: '1.8rem' }],
        'aw-2xl': ['1.62rem', { lineHeight: '2.1rem' }],
      },
      spacing: { 'aw-gutter': '1.25rem', 'aw-rail': '15rem' },
      borderRadius: { aw: '0.375rem' },
      boxShadow: { aw: '0 1px 2px rgb(0 0 0 / 0.06), 0 2px 8px rgb(0 0 0 / 0.04)' },
    },
  },
} satisfies Config
