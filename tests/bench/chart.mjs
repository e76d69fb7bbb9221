// A small hand-written SVG line chart: recall@10 (y) against p95 latency (x), one point per efSearch.
export function recallChart(points) {
  const W = 560, H = 340, L = 60, R = 20, T = 30, B = 50;
  const xs = points.map((p) => p.p95);
  const xMax = Math.max(...xs) * 1.1;
  const yMin = Math.min(0.8, ...points.map((p) => p.recall));
  const x = (v) => L + (v / xMax) * (W - L - R);
  const y = (v) => T + (1 - (v - yMin) / (1 - yMin)) * (H - T - B);
  const path = points.map((p, i) => `${i ? 'L' : 'M'}${x(p.p95).toFixed(1)},${y(p.recall).toFixed(1)}`).join(' ');
  const ticksY = [];
  for (let v = Math.ceil(yMin * 20) / 20; v <= 1.0001; v += 0.05) ticksY.push(v);
  const ticksX = [0, xMax / 4, xMax / 2, (3 * xMax) / 4];
  return `<svg xmlns="http://www.w3.org/2000/svg" width="${W}" height="${H}" font-family="sans-serif" font-size="12">
<rect width="100%" height="100%" fill="white"/>
<text x="${W / 2}" y="18" text-anchor="middle" font-size="14">HNSW recall@10 vs p95 latency (100k x 384, M=16, efConstruction=200)</text>
<line x1="${L}" y1="${H - B}" x2="${W - R}" y2="${H - B}" stroke="black"/>
<line x1="${L}" y1="${T}" x2="${L}" y2="${H - B}" stroke="black"/>
${ticksY.map((v) => `<line x1="${L - 4}" y1="${y(v).toFixed(1)}" x2="${W - R}" y2="${y(v).toFixed(1)}" stroke="#ddd"/><text x="${L - 8}" y="${(y(v) + 4).toFixed(1)}" text-anchor="end">${v.toFixed(2)}</text>`).join('\n')}
${ticksX.map((v) => `<text x="${x(v).toFixed(1)}" y="${H - B + 18}" text-anchor="middle">${v.toFixed(2)}</text>`).join('\n')}
<line x1="${L}" y1="${y(0.99).toFixed(1)}" x2="${W - R}" y2="${y(0.99).toFixed(1)}" stroke="#c33" stroke-dasharray="4 3"/>
<text x="${W - R}" y="${(y(0.99) - 4).toFixed(1)}" text-anchor="end" fill="#c33">0.99</text>
<path d="${path}" fill="none" stroke="#2a6" stroke-width="2"/>
${points.map((p) => `<circle cx="${x(p.p95).toFixed(1)}" cy="${y(p.recall).toFixed(1)}" r="3.5" fill="#2a6"/><text x="${(x(p.p95) + 6).toFixed(1)}" y="${(y(p.recall) + 14).toFixed(1)}">ef ${p.ef}</text>`).join('\n')}
<text x="${(L + W - R) / 2}" y="${H - 10}" text-anchor="middle">p95 search latency (ms)</text>
<text x="16" y="${(T + H - B) / 2}" text-anchor="middle" transform="rotate(-90 16 ${(T + H - B) / 2})">recall@10</text>
</svg>
`;
}
