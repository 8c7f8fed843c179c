import { CsvRowCounter, JsonRowCounter, defaultExportName, dispositionFileName, formatBytes } from './row-counter';

function feed(counter: { push(t: string): void }, text: string, size: number): void {
  for (let i = 0; i < text.length; i += size) counter.push(text.slice(i, i + size));
}

describe('counting rows while a residual export streams in', () => {
  it('counts CSV data lines after the header, across chunk boundaries', () => {
    const csv = 'estimator_id,seq,t,nu_1\r\n7,1,2026-03-01T08:00:00Z,0.1\r\n7,2,2026-03-01T08:00:01Z,-0.2\r\n7,3,2026-03-01T08:00:02Z,0.05';
    for (const size of [1, 3, 17, csv.length]) {
      const c = new CsvRowCounter();
      feed(c, csv, size);
      expect(c.rows).toBe(3);
    }
  });

  it('leaves out comment and blank lines, and counts nothing for a header alone', () => {
    const c = new CsvRowCounter();
    c.push('# whitecap residuals\nestimator_id,seq\n\n1,1\n1,2\n');
    expect(c.rows).toBe(2);
    const header = new CsvRowCounter();
    header.push('estimator_id,seq\n');
    expect(header.rows).toBe(0);
  });

  it('counts the records of a JSON export, not its column list, nested values or brackets in strings', () => {
    const json = JSON.stringify({
      columns: [{ name: 'seq' }, { name: 'nu' }],
      samples: [
        { seq: 1, nu: [0.1, 0.2], S: [[1, 0], [0, 1]], note: 'a {tricky] "one"' },
        { seq: 2, nu: [0.3, -0.1], S: [[1, 0], [0, 1]], note: null },
        { seq: 3, nu: [0, 0], S: [[1, 0], [0, 1]], note: '\\' },
      ],
    });
    for (const size of [1, 5, json.length]) {
      const c = new JsonRowCounter();
      feed(c, json, size);
      expect(c.rows).toBe(3);
    }
  });

  it('counts a top-level array of records and one-object-per-line files', () => {
    const array = new JsonRowCounter();
    array.push('[{"seq":1},{"seq":2}]');
    expect(array.rows).toBe(2);
    const lines = new JsonRowCounter();
    lines.push('{"seq":1}\n{"seq":2}\n{"seq":3}\n');
    expect(lines.rows).toBe(3);
  });

  it('writes byte counts in decimal units', () => {
    expect(formatBytes(812)).toBe('812 B');
    expect(formatBytes(1_400)).toBe('1.4 kB');
    expect(formatBytes(123_456_789)).toBe('123 MB');
    expect(formatBytes(2.5e9)).toBe('2.5 GB');
  });

  it('takes the file name the service gives, safely, or makes one from the window', () => {
    expect(dispositionFileName('attachment; filename="residuals-7.csv"')).toBe('residuals-7.csv');
    expect(dispositionFileName("attachment; filename*=UTF-8''r%C3%A9siduals.json; filename=\"r.json\"")).toBe('résiduals.json');
    expect(dispositionFileName('attachment; filename="../../etc/passwd"')).toBe('.._.._etc_passwd');
    expect(dispositionFileName(null)).toBeNull();
    expect(defaultExportName(new Date('2026-03-01T08:00:00Z'), new Date('2026-03-02T08:00:00Z'), 'csv')).toBe(
      'whitecap-residuals-20260301-0800_20260302-0800.csv',
    );
  });
});
