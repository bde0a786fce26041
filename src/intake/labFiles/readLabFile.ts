/**
 * A lab file read through its mapping: the rows streamed from CSV or .xlsx, each sample mapped and validated.
 * `stream.bytesRead` tells how far the file has been read, for a progress bar.
 */
import { createReadStream, type ReadStream } from 'node:fs';
import { InputError } from '../../domain/errors.ts';
import type { ParsedEvent } from '../../domain/event.ts';
import { LabRecordReader, type LabRecord } from './labRecordReader.ts';
import type { LabMapping } from './mappingSchema.ts';
import { csvRows, labFileKind, xlsxRows } from './rowSources.ts';
import { stoppingAtReadError } from '../fileRecords.ts';

export interface LabFileOptions {
  /** csv or xlsx; default from the file name. */
  readonly format?: string;
  readonly validate: (event: unknown) => ParsedEvent;
}

export function readLabFile(path: string, mapping: LabMapping, options: LabFileOptions): { records: AsyncIterable<LabRecord>; stream: ReadStream } {
  const kind = labFileKind(path, options.format);
  if (kind === undefined) {
    throw new InputError(
      options.format === undefined
        ? `${path}: cannot tell the format from the name; use --format csv or --format xlsx`
        : `--format "${options.format}": unknown format for a lab file read with --map; accepted: csv (or txt), xlsx`,
    );
  }
  const reader = new LabRecordReader(mapping, { validate: options.validate });
  const stream = createReadStream(path);
  const rows = kind === 'csv' ? csvRows(stream, mapping.delimiter) : xlsxRows(stream, mapping.sheet);
  // A file that cannot be read (a directory, an I/O error): "FILE: cannot read the file: reason", not a crash.
  return { stream, records: stoppingAtReadError(path, stream, reader.records(rows)) };
}
