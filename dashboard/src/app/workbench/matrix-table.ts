import { ChangeDetectionStrategy, Component, computed, input } from '@angular/core';
import { matrixCells, matrixShape } from './study-format';

/** A matrix as a table with row and column numbers; each entry's bootstrap interval under it when there is one. */
@Component({
  selector: 'wc-matrix-table',
  template: `
    <table [attr.aria-label]="label()" [class.with-intervals]="hasIntervals()">
      <caption>
        {{ caption() || label() }} <span class="shape">({{ shape() }})</span>
      </caption>
      <thead>
        <tr>
          <td></td>
          @for (c of columns(); track c) {
            <th scope="col">{{ c }}</th>
          }
        </tr>
      </thead>
      <tbody>
        @for (row of cells(); track $index; let i = $index) {
          <tr>
            <th scope="row">{{ i + 1 }}</th>
            @for (cell of row; track $index) {
              <td [class.zero-span]="cell.spansZero">
                <span class="value">{{ cell.text }}</span>
                @if (cell.interval) {
                  <span class="interval"><span class="visually-hidden">bootstrap interval </span>{{ cell.interval }}</span>
                }
              </td>
            }
          </tr>
        }
      </tbody>
    </table>
  `,
  styles: `
    :host { display: block; overflow-x: auto; break-inside: avoid; }
    table { border-collapse: collapse; font-variant-numeric: tabular-nums; }
    caption { text-align: left; font-weight: 500; padding-bottom: 4px; white-space: nowrap; }
    .shape { font-weight: 400; color: var(--mat-sys-on-surface-variant); font-size: 0.85em; }
    th { font-weight: 400; font-size: 0.75rem; color: var(--mat-sys-on-surface-variant); padding: 2px 6px; }
    tbody th { text-align: right; }
    td { padding: 4px 10px; text-align: right; vertical-align: top; font-family: ui-monospace, 'DejaVu Sans Mono', monospace; font-size: 0.88rem; }
    tbody td { border-top: 1px solid var(--mat-sys-outline-variant); }
    tbody tr td:first-of-type { border-left: 2px solid var(--mat-sys-outline); }
    tbody tr td:last-child { border-right: 2px solid var(--mat-sys-outline); }
    .value, .interval { display: block; white-space: nowrap; }
    .interval { font-size: 0.72rem; color: var(--mat-sys-on-surface-variant); }
    .zero-span .interval::after { content: ' · spans 0'; }
  `,
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class MatrixTable {
  readonly matrix = input.required<number[][]>();
  readonly intervals = input<[number, number][][] | null>(null);
  /** The table's accessible name, e.g. "Estimated Q". */
  readonly label = input.required<string>();
  /** Shown above the table; the label when empty. */
  readonly caption = input('');
  protected readonly cells = computed(() => matrixCells(this.matrix(), this.intervals()));
  protected readonly shape = computed(() => matrixShape(this.matrix()));
  protected readonly columns = computed(() => Array.from({ length: this.matrix()[0]?.length ?? 0 }, (_, j) => j + 1));
  protected readonly hasIntervals = computed(() => !!this.intervals());
}
