// The parts of ECharts the dashboard draws with, registered once and loaded lazily with
// the first chart (tree-shaken: only these charts, components and the canvas renderer).
import { BarChart, HeatmapChart, LineChart } from 'echarts/charts';
import {
  AriaComponent,
  DataZoomInsideComponent,
  DataZoomSliderComponent,
  GridComponent,
  LegendComponent,
  MarkAreaComponent,
  MarkLineComponent,
  TooltipComponent,
  VisualMapPiecewiseComponent,
} from 'echarts/components';
import { use } from 'echarts/core';
import { CanvasRenderer } from 'echarts/renderers';

use([
  LineChart,
  BarChart,
  HeatmapChart,
  GridComponent,
  TooltipComponent,
  LegendComponent,
  MarkAreaComponent,
  MarkLineComponent,
  VisualMapPiecewiseComponent,
  DataZoomInsideComponent,
  DataZoomSliderComponent,
  AriaComponent,
  CanvasRenderer,
]);

export { init } from 'echarts/core';
