import { ChangeDetectionStrategy, Component, ElementRef, computed, effect, inject, input, linkedSignal, signal, viewChild } from '@angular/core';
import { toObservable, toSignal } from '@angular/core/rxjs-interop';
import { MatButtonModule } from '@angular/material/button';
import { MatCheckboxModule } from '@angular/material/checkbox';
import { MatFormFieldModule } from '@angular/material/form-field';
import { MatInputModule } from '@angular/material/input';
import { MatProgressBarModule } from '@angular/material/progress-bar';
import { Title } from '@angular/platform-browser';
import { Router, RouterLink } from '@angular/router';
import { firstValueFrom, map, of, switchMap } from 'rxjs';
import type { DesignSummary } from '../../../../../shared/src/api/api-types';
import {
  DESIGN_MATRICES,
  DESIGN_REVISION_CAUTION,
  validateDesignModel,
  type DesignDimension,
  type DesignMatrixKey,
  type DesignProblem,
} from '../../../../../shared/src/design/design-validation';
import { foldLoad, initialLoad, loadSteps } from '../../feedback/load-state';
import { Notice } from '../../feedback/notice';
import { problemIssues } from '../../feedback/problem-issues';
import { problemMessage } from '../../feedback/problem-message';
import { CautionBanner } from '../caution-banner';
import { SignalMark } from '../signal-mark';
import { MatrixEditor, type CellEdit } from './matrix-editor';
import {
  DIMENSION_LIMITS,
  DIMENSION_WORDS,
  OPTIONAL_MATRICES,
  UPLOAD_LIMIT_BYTES,
  draftFromModel,
  emptyDraft,
  expectedShape,
  fitMatrix,
  included,
  modelOf,
  placeProblems,
  readUpload,
  setCell,
  setDimension,
  setIncluded,
  uploadSizeProblem,
  type OptionalMatrix,
  type RevisionDraft,
} from './revision-draft';
import { RevisionsApi, type DesignRevisionDetail } from './revisions-api';

/** What became of the last uploaded file. */
type UploadReport =
  | { kind: 'refused'; message: string }
  | { kind: 'loaded'; name: string; kilobytes: number; problems: number; notTaken: DesignProblem[] };

/** The service's answer when it refused to save. */
interface Refusal {
  message: string;
  issues: { path: string; message: string }[];
}

/** The design and the revision the editor starts from (the newest, or the one in ?from=). */
interface EditorSource {
  design: DesignSummary | null;
  source: DesignRevisionDetail | null;
}

/** The newest revision of a design (highest number), if it has one. */
function newest(design: DesignSummary): number | null {
  const r = [...design.revisions].sort((a, b) => b.revision - a.revision)[0];
  return r ? r.id : null;
}

/** A new design revision by form or uploaded JSON file, checked as you type with the same rules the service applies; saved as a draft. */
@Component({
  selector: 'wc-revision-editor',
  imports: [
    RouterLink,
    MatButtonModule,
    MatCheckboxModule,
    MatFormFieldModule,
    MatInputModule,
    MatProgressBarModule,
    CautionBanner,
    Notice,
    SignalMark,
    MatrixEditor,
  ],
  templateUrl: './revision-editor.html',
  styleUrls: ['./revisions.scss', './revision-editor.scss'],
  changeDetection: ChangeDetectionStrategy.OnPush,
})
export class RevisionEditor {
  private readonly api = inject(RevisionsApi);
  private readonly router = inject(Router);

  /** The route's :id (the design). */
  readonly id = input.required<string>();
  /** ?from=<revision id>: start from that revision instead of the newest. */
  readonly from = input<string | undefined>(undefined);

  protected readonly designId = computed(() => Number(this.id()));
  protected readonly caution = DESIGN_REVISION_CAUTION;
  protected readonly uploadLimitKb = UPLOAD_LIMIT_BYTES / 1024;
  protected readonly dimensionWords = DIMENSION_WORDS;
  protected readonly dimensionLimits = DIMENSION_LIMITS;
  protected readonly optionalMatrices = OPTIONAL_MATRICES;
  protected readonly meaning = Object.fromEntries(DESIGN_MATRICES.map((r) => [r.key, r.meaning])) as Record<DesignMatrixKey, string>;

  protected readonly loaded = toSignal(
    toObservable(computed(() => ({ id: this.designId(), from: this.from() }))).pipe(
      switchMap(({ id, from }) =>
        loadSteps(
          this.api.designs().pipe(
            map((r) => r.items.find((d) => d.id === id) ?? null),
            switchMap((design) => {
              const start = design ? (from ? Number(from) : newest(design)) : null;
              if (!design || !start) return of<EditorSource>({ design, source: null });
              return this.api.revision(id, start).pipe(map((source): EditorSource => ({ design, source })));
            }),
          ),
        ),
      ),
      foldLoad(),
    ),
    { initialValue: initialLoad<EditorSource>() },
  );
  protected readonly design = computed(() => this.loaded().value?.design ?? null);
  protected readonly source = computed(() => this.loaded().value?.source ?? null);
  protected readonly notFound = computed(() => !!this.loaded().value && !this.design());

  /** Whether the designer has changed anything yet: until then a late answer may fill the editor. */
  private touched = false;
  protected readonly draft = linkedSignal<DesignRevisionDetail | null, RevisionDraft>({
    source: this.source,
    computation: (source, previous) => {
      if (previous && this.touched) return previous.value;
      return source ? draftFromModel(source.model as unknown as Record<string, unknown>) : emptyDraft();
    },
  });

  /** The shared check, on every keystroke. */
  protected readonly check = computed(() => validateDesignModel(modelOf(this.draft())));
  protected readonly problems = computed(() => {
    const c = this.check();
    return c.ok ? [] : c.problems;
  });
  /** Beside the matrices: the check's problems, and any the service found that the check here did not. */
  protected readonly placed = computed(() => {
    const own = this.problems();
    const messages = new Set(own.map((p) => p.message));
    const service = (this.refusal()?.issues ?? []).filter((i) => i.path.startsWith('model') && !messages.has(i.message));
    return placeProblems([...own, ...service]);
  });
  protected readonly matrices = computed(() => {
    const d = this.draft();
    const placed = this.placed();
    return DESIGN_MATRICES.filter((r) => included(d, r.key)).map((r) => ({
      key: r.key,
      meaning: r.meaning,
      cells: d.cells[r.key],
      expected: expectedShape(d, r.key),
      problems: placed.byMatrix[r.key] ?? [],
      badCells: placed.cells[r.key] ?? new Set<string>(),
    }));
  });
  protected readonly dimensions = computed(() => {
    const d = this.draft();
    const shown: DesignDimension[] = ['n', 'm'];
    if (d.include.G) shown.push('p');
    if (d.include.B) shown.push('r');
    return shown.map((dim) => ({ dim, value: d.dims[dim], label: DIMENSION_WORDS[dim], max: DIMENSION_LIMITS[dim] }));
  });
  protected readonly dimensionProblem = signal<string | null>(null);

  protected readonly upload = signal<UploadReport | null>(null);
  protected readonly saving = signal(false);
  protected readonly refusal = signal<Refusal | null>(null);
  /** Set when Save was pressed with problems still showing. */
  protected readonly saveBlocked = signal(false);

  private readonly fileInput = viewChild.required<ElementRef<HTMLInputElement>>('fileInput');

  constructor() {
    const title = inject(Title);
    effect(() => {
      const d = this.design();
      if (d) title.setTitle(`New revision of ${d.key} · Whitecap`);
    });
  }

  private edit(change: (draft: RevisionDraft) => RevisionDraft): void {
    this.touched = true;
    this.draft.update(change);
    this.refusal.set(null);
    this.saveBlocked.set(false);
  }

  protected editCell(key: DesignMatrixKey, e: CellEdit): void {
    this.edit((d) => setCell(d, key, e.i, e.j, e.text));
  }

  protected fitToShape(key: DesignMatrixKey): void {
    this.edit((d) => fitMatrix(d, key));
  }

  protected changeDimension(dim: DesignDimension, event: Event): void {
    const text = (event.target as HTMLInputElement).value.trim();
    const value = Number(text);
    if (!/^\d+$/.test(text) || value < 1 || value > DIMENSION_LIMITS[dim]) {
      this.dimensionProblem.set(`${DIMENSION_WORDS[dim]} must be a whole number from 1 to ${DIMENSION_LIMITS[dim]}; the matrices keep their size until it is.`);
      return;
    }
    this.dimensionProblem.set(null);
    this.edit((d) => setDimension(d, dim, value));
  }

  protected includeMatrix(key: OptionalMatrix, on: boolean): void {
    this.edit((d) => setIncluded(d, key, on));
  }

  protected changeDt(event: Event): void {
    const text = (event.target as HTMLInputElement).value;
    this.edit((d) => ({ ...d, dt: text }));
  }

  protected changeNotes(event: Event): void {
    const notes = (event.target as HTMLTextAreaElement).value;
    this.touched = true;
    this.draft.update((d) => ({ ...d, notes }));
  }

  protected chooseFile(): void {
    this.fileInput().nativeElement.click();
  }

  /** Reads a chosen JSON file into the editor: size first, then the JSON, then the same check as typing. */
  protected async uploadFile(event: Event): Promise<void> {
    const element = event.target as HTMLInputElement;
    const file = element.files?.[0];
    element.value = ''; // the same file again is a new choice
    if (!file) return;
    const tooBig = uploadSizeProblem(file.name, file.size);
    if (tooBig) {
      this.upload.set({ kind: 'refused', message: tooBig });
      return;
    }
    const reading = readUpload(file.name, await file.text());
    if (!reading.ok) {
      this.upload.set({ kind: 'refused', message: `${reading.message} Nothing was taken into the editor.` });
      return;
    }
    const next = draftFromModel(reading.model, reading.notes ?? this.draft().notes);
    const inFile = validateDesignModel(reading.model);
    const inEditor = validateDesignModel(modelOf(next));
    // What the editor shows beside its matrices need not be listed twice; what it cannot hold (unknown parts, values that are no matrix) is listed here.
    const shown = new Set(inEditor.ok ? [] : inEditor.problems.map((p) => p.message));
    const notTaken = inFile.ok ? [] : inFile.problems.filter((p) => !shown.has(p.message));
    this.edit(() => next);
    this.upload.set({ kind: 'loaded', name: file.name, kilobytes: Math.max(1, Math.ceil(file.size / 1024)), problems: inFile.ok ? 0 : inFile.problems.length, notTaken });
  }

  protected async saveDraft(event: Event): Promise<void> {
    event.preventDefault();
    if (this.saving()) return;
    const checked = this.check();
    if (!checked.ok) {
      this.saveBlocked.set(true);
      return;
    }
    this.saving.set(true);
    this.refusal.set(null);
    try {
      const created = await firstValueFrom(this.api.createRevision(this.designId(), { model: checked.model, notes: this.draft().notes }));
      await this.router.navigate(['/workbench/designs', this.designId()], { queryParams: { saved: created.id } });
    } catch (err) {
      this.refusal.set({ message: problemMessage(err, 'Try again in a moment; the editor keeps your model.'), issues: problemIssues(err) });
    } finally {
      this.saving.set(false);
    }
  }
}
