import { MonoTypeOperatorFunction, debounce, defer, of, timer } from 'rxjs';

/**
 * Passes the first value at once and debounces the rest: a search box's initial (empty)
 * text loads immediately, while typing waits until the user pauses for `ms`.
 */
export function settleAfterFirst<T>(ms: number): MonoTypeOperatorFunction<T> {
  return (source) =>
    defer(() => {
      let first = true;
      return source.pipe(
        debounce(() => {
          if (!first) return timer(ms);
          first = false;
          return of(0);
        }),
      );
    });
}
