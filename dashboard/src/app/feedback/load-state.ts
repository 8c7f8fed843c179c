import { Observable, OperatorFunction, catchError, map, of, scan, startWith } from 'rxjs';
import { problemMessage } from './problem-message';

/** What a screen knows about one thing it loads: the last value, whether a load is under way, the last error. */
export interface LoadState<T> {
  loading: boolean;
  value: T | null;
  error: string | null;
}

export type LoadStep<T> = { kind: 'start' } | { kind: 'value'; value: T } | { kind: 'error'; message: string };

export const initialLoad = <T>(): LoadState<T> => ({ loading: true, value: null, error: null });

/** One request as steps: start, then its value or its error (as a sentence). */
export function loadSteps<T>(request: Observable<T>, retry?: string): Observable<LoadStep<T>> {
  return request.pipe(
    map((value): LoadStep<T> => ({ kind: 'value', value })),
    catchError((err: unknown) => of<LoadStep<T>>({ kind: 'error', message: problemMessage(err, retry) })),
    startWith<LoadStep<T>>({ kind: 'start' }),
  );
}

/** Folds steps into a state that keeps the last value while the next load runs (no flicker on refresh). */
export function foldLoad<T>(): OperatorFunction<LoadStep<T>, LoadState<T>> {
  return scan<LoadStep<T>, LoadState<T>>((state, step) => {
    switch (step.kind) {
      case 'start':
        return { ...state, loading: true };
      case 'value':
        return { loading: false, value: step.value, error: null };
      case 'error':
        return { ...state, loading: false, error: step.message };
    }
  }, initialLoad<T>());
}
