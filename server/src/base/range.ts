// A half-open range [start, end) of UTF-16 code-unit offsets into a document's text: the
// one way every stage refers to a place in the text (base/lineIndex.ts converts to lines).
export interface Range { start: number; end: number }
