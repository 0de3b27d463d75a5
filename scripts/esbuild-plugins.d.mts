import type { Plugin } from 'esbuild';
export declare const rawTextPlugin: Plugin;
