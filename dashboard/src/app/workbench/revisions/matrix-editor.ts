import { ChangeDetectionStrategy, Component, computed, input, output } from '@angular/core';
import { MatButtonModule } from '@angular/material/button';
import { SignalMark } from '../signal-mark';

export interface CellEdit {
  i: number;
  j: number;
  text: string;
}

/** One matrix of a design as a grid of text cells, its size beside the size it must have, and its problems under it. */
@Component({
  selector: 'wc-matrix-editor',
  imports: [MatButtonModule, SignalMark],
  template: `
    <div class="head">
      <h3 [id]="headingId()">{{ name() }} <span class="meaning">{{ meaning() }}</span></h3>
      <span class="shape" [class.wrong]="shapeWrong()">
        {{ rows() }} × {{ columns() }}
        @if (shapeWrong()) {
          <span>· must be {{ expected().rows }} × {{ expected().columns }} ({{ expected().symbols }})</span>
        } @else {
          <span class="symbols">({{ expected().symbols }})</span>
        }
      </span>
      @if (shapeWrong()) {
        <button mat-stroked-button type="button" class="fit" (click)="fit.emit()">Resize to {{ expected().rows }} × {{ expected().columns }}</button>
      }
    </div>
    <div class="grid-wrap">
      <table role="group" [attr.aria-labelledby]="headingId()">
        <tbody>
          @for (row of cells(); track $index; let i = $index) {
            <tr>
              @for (cell of row; track $index; let j = $index) {
                <td>
                  <input
                    type="text"
                    inputmode="decimal"
                    autocomplete="off"
                    spellcheck="false"
                    [value]="cell"
                    [class.bad]="badCells().has(i + '.' + j)"
                    [attr.aria-invalid]="badCells().has(i + '.' + j)"
                    [attr.aria-label]="name() + ' row ' + (i + 1) + ', column ' + (j + 1)"
                    [attr.aria-describedby]="problems().length ? problemsId() : null"
                    (input)="editCell(i, j, $event)"
                  />
                </td>
              }
            </tr>
          }
        </tbody>
      </table>
    </div>
    @if (problems().length) {
      <ul class="problems" [id]="problemsId()" [attr.aria-label]="'Problems with ' + name()">
        @for (p of problems(); track $index) {
          <li><wc-signal-mark kind="problem" word="Problem" /> <span>{{ p }}</span></li>
        }
      </ul>
    }
  `,
  styles: `
    :host {
      display: flex;
      flex-direction: column;
      gap: 8px;
      padding: 12px 14px;
      border: 1px solid var(--mat-sys-outline-variant);
      border-radius: 10px;
      background: var(--mat-sys-surface);
      min-width: 0;
    }
    :host([data-problems]) { border-color: var(--wc-magenta); border-left-width: 4px; }
    .head { display: flex; flex-wrap: wrap; align-items: baseline; gap: 4px 12px; }
    h3 { margin: 0; font: var(--mat-sys-title-medium); }
    .meaning { font: var(--mat-sys-body-medium); color: var(--mat-sys-on-surface-variant); }
    .shape { font-variant-numeric: tabular-nums; color: var(--mat-sys-on-surface-variant); font-size: 0.9rem; }
    .shape.wrong { color: var(--wc-magenta); font-weight: 500; }
    .fit { margin-left: auto; }
    .grid-wrap { overflow-x: auto; }
    table { border-collapse: separate; border-spacing: 4px; border-left: 2px solid var(--mat-sys-outline); border-right: 2px solid var(--mat-sys-outline); }
    td { padding: 0; }
    input {
      width: 6.5em;
      box-sizing: border-box;
      padding: 5px 6px;
      border: 1px solid var(--mat-sys-outline-variant);
      border-radius: 4px;
      background: var(--mat-sys-surface-container-lowest, transparent);
      color: inherit;
      font: 0.88rem ui-monospace, 'DejaVu Sans Mono', monospace;
      text-align: right;
    }
    input:focus { outline: 2px solid var(--mat-sys-primary); outline-offset: 0; }
    input.bad { border: 2px dashed var(--wc-magenta); background: color-mix(in srgb, var(--wc-magenta) 8%, transparent); }
    .problems { margin: 0; padding: 0; list-style: none; display: flex; flex-direction: column; gap: 4px; }
    .problems li { display: flex; gap: 8px; align-items: baseline; }
  `,
  host: { '[attr.data-problems]': 'problems().length ? "" : null', '[attr.data-matrix]': 'name()' },
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class MatrixEditor {
  readonly name = input.required<string>();
  readonly meaning = input('');
  readonly cells = input.required<string[][]>();
  readonly expected = input.required<{ rows: number; columns: number; symbols: string }>();
  readonly problems = input<string[]>([]);
  /** Cells at fault, as "row.column" (zero-based). */
  readonly badCells = input<ReadonlySet<string>>(new Set());
  readonly cellChange = output<CellEdit>();
  readonly fit = output<void>();

  protected readonly rows = computed(() => this.cells().length);
  protected readonly columns = computed(() => Math.max(0, ...this.cells().map((r) => r.length)));
  protected readonly shapeWrong = computed(
    () => this.rows() !== this.expected().rows || this.cells().some((r) => r.length !== this.expected().columns),
  );
  protected readonly headingId = computed(() => `matrix-${this.name()}`);
  protected readonly problemsId = computed(() => `matrix-${this.name()}-problems`);

  protected editCell(i: number, j: number, event: Event): void {
    this.cellChange.emit({ i, j, text: (event.target as HTMLInputElement).value });
  }
}
