import { describe, expect, it } from 'vitest';
import { loopMisclosures, type LoopSection } from '../../../server/science/adjustment/loops';
import { gridNetwork, smallRandomNetwork } from './network-fixtures';

// Loop misclosure = Σ ± observed differences around a closed circuit (Ghilani 2017, ch. 12; common practice);
// tolerance k·√E with E the loop length in km (FGCC 1984 §3.5; k = 4 mm for the loop closure of first-order class I is from memory).

describe('loop misclosures', () => {
  it('triangle: misclosure, height misclosure with g = 9.81, tolerance 4 mm·√L', () => {
    const sections: LoopSection[] = [
      { from: 'A', to: 'B', deltaC: 10, lengthKm: 4 },
      { from: 'B', to: 'C', deltaC: 5, lengthKm: 5 },
      { from: 'A', to: 'C', deltaC: 15.02, lengthKm: 7 },
    ];
    const rep = loopMisclosures(sections);
    expect(rep.independentLoops).toBe(1);
    expect(rep.loops).toHaveLength(1);
    const loop = rep.loops[0];
    // Walking the loop in either sense gives ±(10 + 5 − 15.02).
    expect(Math.abs(loop.misclosure_m2s2)).toBeCloseTo(0.02, 12);
    expect(Math.abs(loop.misclosureMm)).toBeCloseTo((0.02 / 9.81) * 1000, 9);
    expect(loop.lengthKm).toBe(16);
    expect(loop.toleranceMm).toBeCloseTo(16, 12); // 4 mm · √16
    expect(loop.passed).toBe(true); // 2.04 mm < 16 mm
    const strict = loopMisclosures(sections, { toleranceMmPerSqrtKm: 0.5 }); // 0.5·4 = 2 mm < 2.04 mm
    expect(strict.loops[0].passed).toBe(false);
  });

  it('loops are closed walks, their number is m − n + parts, and a consistent network closes exactly', () => {
    const net = smallRandomNetwork(71, 40, 25);
    // Second, separate part: a square.
    const sections: LoopSection[] = net.observations.map((o, i) => {
      const fromIdx = Number(o.from.slice(2));
      const toIdx = Number(o.to.slice(2));
      return { from: o.from, to: o.to, deltaC: net.trueC[toIdx] - net.trueC[fromIdx], lengthKm: o.lengthKm, id: `S${i}` };
    });
    sections.push(
      { from: 'Q1', to: 'Q2', deltaC: 1, lengthKm: 1 },
      { from: 'Q2', to: 'Q3', deltaC: 2, lengthKm: 1 },
      { from: 'Q3', to: 'Q4', deltaC: -4, lengthKm: 1 },
      { from: 'Q4', to: 'Q1', deltaC: 1, lengthKm: 1 },
    );
    const rep = loopMisclosures(sections);
    expect(rep.independentLoops).toBe(sections.length - 44 + 2);
    expect(rep.loops).toHaveLength(rep.independentLoops);
    for (const loop of rep.loops) {
      const start = loop.orientation[0] === 1 ? sections[loop.sections[0]].from : sections[loop.sections[0]].to;
      let at = start;
      loop.sections.forEach((e, q) => {
        const s = sections[e];
        expect(loop.orientation[q] === 1 ? s.from : s.to).toBe(at);
        at = loop.orientation[q] === 1 ? s.to : s.from;
      });
      expect(at).toBe(start);
      expect(Math.abs(loop.misclosure_m2s2)).toBeLessThan(1e-9);
    }
  });

  it('a blunder in one section shows in exactly the loops that contain it', () => {
    const net = smallRandomNetwork(72, 30, 20);
    const sections: LoopSection[] = net.observations.map((o) => ({ ...o }));
    const base = loopMisclosures(sections);
    const target = base.loops[3].sections[1];
    sections[target] = { ...sections[target], deltaC: sections[target].deltaC + 0.5 };
    const hit = loopMisclosures(sections);
    hit.loops.forEach((loop, i) => {
      const q = Array.from(loop.sections).indexOf(target);
      const expected = q >= 0 ? base.loops[i].misclosure_m2s2 + 0.5 * loop.orientation[q] : base.loops[i].misclosure_m2s2;
      expect(loop.misclosure_m2s2).toBeCloseTo(expected, 10);
    });
  });

  it('handles a 30,000-section network (one loop per chord)', () => {
    const net = gridNetwork(5, 10_000);
    const rep = loopMisclosures(net.observations);
    expect(rep.loops.length).toBe(rep.independentLoops);
    expect(rep.independentLoops).toBe(net.observations.length - 10_000 + 1);
  });
});
