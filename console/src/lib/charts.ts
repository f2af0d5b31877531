// Chart.js set-up, once: the pieces our charts use, our colours, and a small plugin of our own that
// draws labelled reference lines (Qn, T1, T2, the observed statistic) in data coordinates.
import {
  BarController,
  BarElement,
  CategoryScale,
  Chart,
  Filler,
  Legend,
  LinearScale,
  LineController,
  LineElement,
  PointElement,
  Tooltip,
  type Plugin,
} from 'chart.js';

export const COLORS = {
  ink: '#1d2a2e',
  inkSoft: '#51616a',
  line: '#dcd7cc',
  brand: '#1f5d63',
  brandFill: 'rgba(31, 93, 99, 0.55)',
  accent: '#b8692e',
  accentFill: 'rgba(184, 105, 46, 0.35)',
  fail: '#a3322a',
  hold: '#7f6210',
  info: '#2d5b8a',
} as const;

export interface ReferenceLine {
  axis: 'x' | 'y';
  value: number;
  label: string;
  color: string;
  dash?: number[];
}

declare module 'chart.js' {
  interface PluginOptionsByType<TType> {
    referenceLines?: { lines: ReferenceLine[] };
  }
}

const referenceLines: Plugin = {
  id: 'referenceLines',
  afterDatasetsDraw(chart, _args, options: { lines?: ReferenceLine[] }) {
    const { ctx, chartArea: area, scales } = chart;
    ctx.save();
    ctx.font = '600 11px Inter, sans-serif';
    (options.lines ?? []).forEach((line, i) => {
      const scale = scales[line.axis];
      if (!scale) return;
      const px = scale.getPixelForValue(line.value);
      if (!Number.isFinite(px)) return;
      ctx.strokeStyle = line.color;
      ctx.fillStyle = line.color;
      ctx.lineWidth = 1.6;
      ctx.setLineDash(line.dash ?? []);
      ctx.beginPath();
      if (line.axis === 'x') {
        ctx.moveTo(px, area.top);
        ctx.lineTo(px, area.bottom);
      } else {
        ctx.moveTo(area.left, px);
        ctx.lineTo(area.right, px);
      }
      ctx.stroke();
      ctx.setLineDash([]);
      if (line.axis === 'x') {
        const flip = px + ctx.measureText(line.label).width + 6 > area.right;
        ctx.textAlign = flip ? 'right' : 'left';
        ctx.fillText(line.label, px + (flip ? -4 : 4), area.top + 12 + 13 * (i % 3));
      } else {
        ctx.textAlign = 'right';
        ctx.fillText(line.label, area.right - 4, px - 4);
      }
    });
    ctx.restore();
  },
};

/** Marks the canvas once Chart.js has drawn it, so tests (and screen readers' wrappers) can tell. */
const drawnMarker: Plugin = {
  id: 'drawnMarker',
  afterRender(chart) {
    chart.canvas.dataset.drawn = 'true';
  },
};

let registered = false;
export function registerCharts(): void {
  if (registered) return;
  Chart.register(BarController, BarElement, LineController, LineElement, PointElement, LinearScale, CategoryScale, Filler, Tooltip, Legend, referenceLines, drawnMarker);
  Chart.defaults.font.family = 'Inter, ui-sans-serif, system-ui, sans-serif';
  Chart.defaults.color = COLORS.inkSoft;
  Chart.defaults.borderColor = 'rgba(220, 215, 204, 0.7)';
  Chart.defaults.maintainAspectRatio = false;
  Chart.defaults.animation = false;
  registered = true;
}
