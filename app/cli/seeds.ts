// Parses seed lists such as "0-7", "3,5,9" or "0-3,10-12".
export const MAX_SEEDS = 100_000;

export function parseSeeds(text: string): number[] {
  const out: number[] = [];
  for (const part of text.split(',').map((s) => s.trim()).filter(Boolean)) {
    const m = /^(\d+)(?:-(\d+))?$/.exec(part);
    if (!m) throw new Error(`'${part}' is not a seed or a seed range (examples: 7, 0-7, 0-3,10)`);
    const a = Number(m[1]);
    const b = m[2] === undefined ? a : Number(m[2]);
    if (b < a) throw new Error(`seed range '${part}' runs backwards`);
    if (b > 0xffffffff) throw new Error(`seed ${b} is above 4294967295`);
    if (out.length + (b - a + 1) > MAX_SEEDS) throw new Error(`more than ${MAX_SEEDS} seeds requested`);
    for (let s = a; s <= b; s++) out.push(s);
  }
  if (out.length === 0) throw new Error('no seeds given');
  return out;
}
