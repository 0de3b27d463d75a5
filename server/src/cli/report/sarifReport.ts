// `saltus check --format sarif`: a SARIF 2.1.0 log (OASIS standard) with one run.
// - tool.driver: name 'saltus', version, informationUri, and one rule per diagnostic code
//   that occurs (id = the code, shortDescription from RULE_DESCRIPTIONS); results carry
//   ruleId and ruleIndex into that array.
// - level: error -> error, warning -> warning, info and hint -> note.
// - locations: artifactLocation.uri relative to the working directory with uriBaseId SRCROOT
//   (run.originalUriBaseIds.SRCROOT is that directory as a file: URI ending in '/'); a file
//   outside it gets an absolute file: URI. Regions are 1-based; endColumn is the column just
//   after the last character (SARIF's convention), so an empty range has endColumn ==
//   startColumn. run.columnKind is 'utf16CodeUnits': columns count UTF-16 code units.
// - related places become relatedLocations, fixes become fixes[].artifactChanges.
// Invariants: every result has ruleId, level, message.text and exactly one location; every
// ruleId names a rule in tool.driver.rules; the output is JSON followed by a newline.
import { relative, sep } from 'node:path';
import { pathToFileURL } from 'node:url';
import type { Diagnostic, DiagnosticCode, Severity } from '../../base/diagnostic';
import { SALTUS_INFORMATION_URI, SALTUS_VERSION } from '../../base/version';
import { lineRange, type CheckedFile } from './checkedFile';
import { RULE_DESCRIPTIONS } from './ruleDescriptions';

export const SARIF_SCHEMA = 'https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json';

type SarifLevel = 'error' | 'warning' | 'note';
const LEVEL: Record<Severity, SarifLevel> = { error: 'error', warning: 'warning', info: 'note', hint: 'note' };

interface ArtifactLocation { uri: string; uriBaseId?: string; index?: number }
interface Region { startLine: number; startColumn: number; endLine: number; endColumn: number }

function region(file: CheckedFile, range: { start: number; end: number }): Region {
  const r = lineRange(file, range);
  return { startLine: r.start.line + 1, startColumn: r.start.character + 1, endLine: r.end.line + 1, endColumn: r.end.character + 1 };
}

/** A relative URI reference (RFC 3986) for a path under cwd, else an absolute file: URI. */
export function artifactUri(absolute: string, cwd: string): ArtifactLocation {
  const rel = relative(cwd, absolute);
  if (rel === '' || rel.startsWith('..') || /^[a-zA-Z]:/.test(rel) || rel.startsWith(sep)) {
    return { uri: pathToFileURL(absolute).href };
  }
  return { uri: rel.split(sep).map(encodeURIComponent).join('/'), uriBaseId: 'SRCROOT' };
}

export function sarifReport(files: CheckedFile[], cwd: string): string {
  const codes: DiagnosticCode[] = [];
  for (const f of files) for (const d of f.diagnostics) if (!codes.includes(d.code)) codes.push(d.code);
  codes.sort();
  const rules = codes.map((id) => ({ id, shortDescription: { text: RULE_DESCRIPTIONS[id] ?? `Saltus diagnostic ${id}.` } }));

  const artifacts = files.map((f) => ({ location: artifactUri(f.absolute, cwd) }));
  const results = files.flatMap((f, index) => {
    const artifactLocation = { ...artifacts[index]!.location, index };
    return f.diagnostics.map((d) => result(f, d, artifactLocation, codes.indexOf(d.code)));
  });

  let root = pathToFileURL(cwd).href;
  if (!root.endsWith('/')) root += '/';
  const log = {
    version: '2.1.0',
    $schema: SARIF_SCHEMA,
    runs: [
      {
        tool: { driver: { name: 'saltus', version: SALTUS_VERSION, semanticVersion: SALTUS_VERSION, informationUri: SALTUS_INFORMATION_URI, rules } },
        originalUriBaseIds: { SRCROOT: { uri: root } },
        columnKind: 'utf16CodeUnits',
        artifacts,
        results,
      },
    ],
  };
  return JSON.stringify(log, null, 2) + '\n';
}

function result(f: CheckedFile, d: Diagnostic, artifactLocation: ArtifactLocation, ruleIndex: number) {
  const out: Record<string, unknown> = {
    ruleId: d.code,
    ruleIndex,
    level: LEVEL[d.severity],
    message: { text: d.message },
    locations: [{ physicalLocation: { artifactLocation, region: region(f, d.range) } }],
  };
  if (d.related && d.related.length > 0) {
    out.relatedLocations = d.related.map((r, id) => ({
      id,
      message: { text: r.message },
      physicalLocation: { artifactLocation, region: region(f, r.range) },
    }));
  }
  const fixes = (d.fixes ?? []).filter((x) => x.edits.length > 0);
  if (fixes.length > 0) {
    out.fixes = fixes.map((x) => ({
      description: { text: x.title },
      artifactChanges: [{
        artifactLocation,
        replacements: x.edits.map((e) => ({ deletedRegion: region(f, e.range), insertedContent: { text: e.newText } })),
      }],
    }));
  }
  return out;
}
