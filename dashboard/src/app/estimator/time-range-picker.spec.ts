import { provideZonelessChangeDetection } from '@angular/core';
import { TestBed } from '@angular/core/testing';
import { TestbedHarnessEnvironment } from '@angular/cdk/testing/testbed';
import { MatButtonHarness } from '@angular/material/button/testing';
import { MatButtonToggleHarness } from '@angular/material/button-toggle/testing';
import { MatInputHarness } from '@angular/material/input/testing';
import { DEFAULT_RANGE, customRangeProblem, type TimeRange } from './time-range';
import { TimeRangePicker } from './time-range-picker';

describe('TimeRangePicker', () => {
  async function setup() {
    TestBed.configureTestingModule({ providers: [provideZonelessChangeDetection()] });
    const fixture = TestBed.createComponent(TimeRangePicker);
    fixture.componentRef.setInput('range', DEFAULT_RANGE);
    const emitted: TimeRange[] = [];
    fixture.componentInstance.rangeChange.subscribe((r) => emitted.push(r));
    await fixture.whenStable();
    return { fixture, emitted, loader: TestbedHarnessEnvironment.loader(fixture) };
  }

  it('shows the current preset as pressed and emits a moving range for each preset', async () => {
    const { loader, emitted } = await setup();
    expect(await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Last 1 h' }))).isChecked()).toBe(true);

    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Last 15 min' }))).check();
    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Last 7 d' }))).check();
    expect(emitted).toEqual([
      { kind: 'last', ms: 15 * 60_000 },
      { kind: 'last', ms: 7 * 86_400_000 },
    ]);
  });

  it('emits a custom range with the start and end typed in', async () => {
    const { loader, emitted } = await setup();
    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Custom' }))).check();
    const [from, to] = await loader.getAllHarnesses(MatInputHarness);
    await from.setValue('2026-03-01T08:00');
    await to.setValue('2026-03-01T09:30');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Show this range' }))).click();
    expect(emitted).toEqual([{ kind: 'custom', from: new Date('2026-03-01T08:00'), to: new Date('2026-03-01T09:30') }]);
  });

  it('refuses a custom range that ends before it starts, and says why', async () => {
    const { loader, emitted, fixture } = await setup();
    await (await loader.getHarness(MatButtonToggleHarness.with({ text: 'Custom' }))).check();
    const [from, to] = await loader.getAllHarnesses(MatInputHarness);
    await from.setValue('2026-03-01T10:00');
    await to.setValue('2026-03-01T09:00');
    await (await loader.getHarness(MatButtonHarness.with({ text: 'Show this range' }))).click();
    expect(emitted).toEqual([]);
    expect((fixture.nativeElement as HTMLElement).querySelector('[role=alert]')?.textContent).toContain('start must be before the end');
  });

  it('checks custom ranges against the longest the service serves', () => {
    const now = Date.parse('2026-03-01T00:00:00Z');
    expect(customRangeProblem(new Date(now - 40 * 86_400_000), new Date(now), now)).toContain('31 days');
    expect(customRangeProblem(null, new Date(now), now)).toContain('starts');
    expect(customRangeProblem(new Date(now - 1000), new Date(now), now)).toBeNull();
  });
});
