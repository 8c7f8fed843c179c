// The dashboard's ECharts parts plus the scatter chart the workbench draws poles with.
// Provided to the workbench's charts only, so other screens do not load it.
import '../charts/echarts-setup';
import { ScatterChart } from 'echarts/charts';
import { use } from 'echarts/core';

use([ScatterChart]);

export { init } from 'echarts/core';
