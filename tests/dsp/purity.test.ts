// The analysis core in dsp/ is pure TypeScript (DESIGN.md "One pipeline, two drivers"; STYLE.md
// "The dsp/ core"): it runs unchanged in a Web Worker and in Node. Outside dsp/cli/ no file may
// import from web/, from dsp/cli/ or a Node built-in (the list is Node's own
// module.builtinModules), and none may use browser globals. dsp/tsconfig.json (lib ES2022, no DOM,
// no Node types) enforces the same at compile time; this test keeps it when configs change.
// The globals check runs the TypeScript 5.9 checker (a general-purpose reference tool).
import { builtinModules } from 'node:module';
import { mkdtempSync, readFileSync, readdirSync, rmSync, statSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join, relative, resolve, sep } from 'node:path';
import ts from 'typescript';
import { describe, expect, it } from 'vitest';

const ROOT = resolve(__dirname, '../..');
const DSP = join(ROOT, 'dsp');

function tsFiles(dir: string): string[] {
  const out: string[] = [];
  for (const name of readdirSync(dir)) {
    const p = join(dir, name);
    if (statSync(p).isDirectory()) out.push(...tsFiles(p));
    else if (name.endsWith('.ts') && !name.endsWith('.d.ts')) out.push(p);
  }
  return out;
}

const coreFiles = tsFiles(DSP).filter((f) => !f.startsWith(join(DSP, 'cli') + sep));

/** Module specifiers of static imports/exports, dynamic import() and require(). */
function specifiers(src: string): string[] {
  const out: string[] = [];
  const re = /(?:^|[;\s])(?:import|export)\s[^'"`;]*?from\s*(['"])([^'"]+)\1|(?:^|[;\s])import\s*(['"])([^'"]+)\3|import\(\s*(['"])([^'"]+)\5\s*\)|require\(\s*(['"])([^'"]+)\7\s*\)/g;
  for (const m of src.matchAll(re)) out.push(m[2] ?? m[4] ?? m[6] ?? m[8]);
  return out;
}

const NODE_BUILTINS = new Set(builtinModules.flatMap((m) => [m, `node:${m}`]));

/**
 * Names a file uses that the ES2022 library does not define (DOM, Web Audio, Node globals such as
 * process or Buffer), found by the TypeScript checker itself with lib ES2022 and no @types: a
 * local variable that happens to be called `window` is not a use of the global.
 */
function foreignGlobals(files: string[]): Map<string, string[]> {
  const program = ts.createProgram(files, {
    target: ts.ScriptTarget.ES2022,
    module: ts.ModuleKind.ESNext,
    moduleResolution: ts.ModuleResolutionKind.Bundler,
    lib: ['lib.es2022.d.ts'],
    types: [],
    noEmit: true,
    skipLibCheck: true,
  });
  // "Cannot find name" and its variants that suggest installing DOM or Node typings.
  const codes = new Set([2304, 2580, 2581, 2582, 2583, 2584, 2591, 2592, 2593, 2867, 2868]);
  const out = new Map<string, string[]>();
  const wanted = new Set(files.map((f) => resolve(f)));
  for (const d of ts.getPreEmitDiagnostics(program)) {
    if (!d.file || !codes.has(d.code) || !wanted.has(resolve(d.file.fileName))) continue;
    const key = resolve(d.file.fileName);
    const list = out.get(key) ?? [];
    list.push(ts.flattenDiagnosticMessageText(d.messageText, ' ').split('.')[0]);
    out.set(key, list);
  }
  return out;
}

describe('purity of dsp/ (outside dsp/cli/)', () => {
  it('finds the core files (the walk itself works)', () => {
    const names = coreFiles.map((f) => relative(ROOT, f));
    expect(names).toContain(join('dsp', 'types.ts'));
    expect(names).toContain(join('dsp', 'io', 'wav.ts'));
    expect(names.some((n) => n.startsWith(join('dsp', 'cli')))).toBe(false);
  });

  it('the import scanner sees static, side-effect, dynamic and require forms', () => {
    const src = `import a from 'fs';\nimport { b } from "../web/x";\nexport * from './y';\nimport 'node:os';\nconst c = await import('path');\nrequire('child_process');`;
    expect(specifiers(src)).toEqual(['fs', '../web/x', './y', 'node:os', 'path', 'child_process']);
  });

  it.each(coreFiles.map((f) => [relative(ROOT, f), f]))('%s imports nothing from web/, dsp/cli/ or Node', (_name, file) => {
    const src = readFileSync(file, 'utf8');
    const bad: string[] = [];
    for (const spec of specifiers(src)) {
      if (NODE_BUILTINS.has(spec)) bad.push(`${spec} (Node built-in)`);
      else if (spec.startsWith('.')) {
        const target = resolve(join(file, '..'), spec);
        if (target.startsWith(join(ROOT, 'web'))) bad.push(`${spec} (web/)`);
        if (target.startsWith(join(DSP, 'cli'))) bad.push(`${spec} (dsp/cli/)`);
      }
    }
    expect(bad).toEqual([]);
  });

  it('no core file uses a browser or Node global (checked by the TypeScript checker, lib ES2022 only)', () => {
    const found = foreignGlobals(coreFiles);
    const listed = [...found].map(([f, names]) => `${relative(ROOT, f)}: ${names.join('; ')}`);
    expect(listed).toEqual([]);
  });

  it('the globals check catches uses and ignores a local named like a global', () => {
    const dir = mkdtempSync(join(tmpdir(), 'purity-'));
    const bad = join(dir, 'bad.ts');
    const good = join(dir, 'good.ts');
    writeFileSync(bad, 'export const w = window.innerWidth;\nexport const t = performance.now();\nexport const b = Buffer.alloc(1);\n');
    writeFileSync(good, 'export function f(): number { const window = new Float64Array(4); return window[0]; }\n');
    try {
      const found = foreignGlobals([bad, good]);
      expect(found.get(resolve(bad))?.length).toBe(3);
      expect(found.has(resolve(good))).toBe(false);
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  });
});
