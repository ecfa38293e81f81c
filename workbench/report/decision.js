// The report's decision, recomputed in the browser (see workbench/report/decision.py for the
// data). Same formulas as workbench/analysis/recommendation.py; nothing is fetched.
"use strict";
(function () {
  const D = JSON.parse(document.getElementById("decision-data").textContent);
  const S = D.settings.length, L = D.landscapes.length, K = D.distortions.length;
  const num = (v) => (v === null ? NaN : v);
  const byId = (id) => document.getElementById(id);

  // numpy's sum of a float array (pairwise in blocks of 8 beyond 8 values), so that means
  // and weighted sums add in the order Python adds them.
  function npSum(a) {
    const n = a.length;
    if (n < 8) {
      let s = 0;
      for (let i = 0; i < n; i++) s += a[i];
      return s;
    }
    if (n <= 128) {
      const r = a.slice(0, 8);
      let i = 8;
      for (; i < n - (n % 8); i += 8) for (let j = 0; j < 8; j++) r[j] += a[i + j];
      let s = ((r[0] + r[1]) + (r[2] + r[3])) + ((r[4] + r[5]) + (r[6] + r[7]));
      for (; i < n; i++) s += a[i];
      return s;
    }
    const half = Math.floor(n / 2 / 8) * 8;
    return npSum(a.slice(0, half)) + npSum(a.slice(half));
  }

  // Weights divided by their sum (Python: w / total); null when they are all 0.
  function normalise(w) {
    const total = npSum(w);
    return total > 0 ? w.map((v) => v / total) : null;
  }

  // Σ_l w_l x[s][l][d]: the landscapes' weighted mean (standardise.over_landscapes).
  function overLandscapes(x, lw) {
    return x.map((bySetting) => {
      const out = [];
      for (let d = 0; d < K; d++) out.push(npSum(bySetting.map((row, l) => num(row[d]) * lw[l])));
      return out;
    });
  }

  // The rule over distortions for one setting's m[d] (recommendation.score).
  function ruleScore(m, w, rule, level) {
    if (rule === "expected") return npSum(m.map((v, d) => v * w[d]));
    if (rule === "minimax") return Math.max(...m.map((v, d) => (w[d] > 0 ? v : -Infinity)));
    // cvar: the mean of the worst `level` of the weight, worst distortion first (stable).
    const order = m.map((v, d) => d).sort((a, b) => m[b] - m[a] || a - b);
    let cum = 0;
    const parts = order.map((d) => {
      cum += w[d];
      const before = cum - w[d];
      return Math.min(w[d], Math.max(0, level - before)) * m[d];
    });
    return npSum(parts) / level;
  }

  function scores(x, lw, w, rule, level) {
    return overLandscapes(x, lw).map((m) => ruleScore(m, w, rule, level));
  }

  // Every draw's replicate means, once: draws × settings × landscapes × distortions.
  const R = D.index.length ? D.index[0].length : 0;
  const drawMeans = D.index.map((pick) =>
    D.replicates.map((bySetting) =>
      bySetting.map((row) => row.map((cell) => npSum(pick.map((r) => num(cell[r]))) / R))
    )
  );

  // numpy's linear percentile of sorted values (its virtual index and lerp).
  function quantile(sorted, q) {
    const n = sorted.length;
    const h = Math.min(Math.max(n * q + (1 + q * -1) - 1, 0), n - 1);
    const lo = Math.floor(h), t = h - lo;
    const a = sorted[lo], b = sorted[Math.min(lo + 1, n - 1)];
    const diff = b - a;
    return t >= 0.5 ? b - diff * (1 - t) : a + diff * t;
  }

  function interval(s, lw, w, rule, level) {
    const v = drawMeans
      .map((x) => ruleScore(overLandscapes([x[s]], lw)[0], w, rule, level))
      .sort((a, b) => a - b);
    const alpha = (1 - D.confidence) / 2;
    return [quantile(v, alpha), quantile(v, 1 - alpha)];
  }

  // Three significant digits, as the rest of the page (report/content.py: num).
  function fmt(v) {
    if (!Number.isFinite(v)) return String(v);
    return Math.abs(v) >= 1000 ? v.toFixed(0) : String(Number(v.toPrecision(3)));
  }
  // A word for a POSIX shell: as it is when safe, else in single quotes.
  const shellWord = (s) => (/^[\w.,=:/+-]+$/.test(s) ? s : "'" + s.replace(/'/g, "'\\''") + "'");

  function readInputs(cls) {
    return [...document.querySelectorAll("input." + cls)].map((e) => Number(e.value));
  }

  function update() {
    const rule = byId("rule").value;
    const level = Number(byId("level").value);
    byId("level").disabled = rule !== "cvar";
    const dw = readInputs("w-d"), lwIn = readInputs("w-l");
    const note = byId("live-note");
    const w = normalise(dw);
    const equal = lwIn.every((v) => v === lwIn[0]);
    // Python divides the given landscape weights by their sum twice (when parsed, when used).
    const lw = equal ? lwIn.map(() => 1 / L) : normalise(normalise(lwIn) || []);
    const bad = !w ? "the distortion weights are all 0" : !lw ? "the landscape weights are all 0"
      : rule === "cvar" && !(level > 0 && level <= 1) ? "the CVaR level must be in (0, 1]" : "";
    note.hidden = !bad;
    note.textContent = bad ? "Nothing to show: " + bad + "." : "";
    if (bad) return;
    const score = scores(D.scored, lw, w, rule, level);
    const shown = D.score === "raw" ? score : scores(D.means, lw, w, rule, level);
    const order = score.map((v, s) => s).sort((a, b) => {
      const x = Number.isNaN(score[a]) ? Infinity : score[a];
      const y = Number.isNaN(score[b]) ? Infinity : score[b];
      return x - y || a - b;
    });
    const best = order[0], [lo, hi] = interval(best, lw, w, rule, level);
    const choice = byId("live-choice");
    choice.textContent = D.settings[best];
    // Full precision for whoever reads the page's numbers (the browser test does).
    Object.assign(choice.dataset, { setting: D.settings[best], value: shown[best] });
    Object.assign(choice.dataset, { low: lo, high: hi });
    const conf = Math.round(100 * D.confidence) + " %";
    byId("live-value").textContent = `${D.metric}: ${fmt(shown[best])} ${D.unit} ` +
      `(${conf} interval ${fmt(lo)} to ${fmt(hi)}; recomputed in the browser)`;
    const runner = byId("live-runner");
    if (S > 1) {
      const r = order[1], [rlo, rhi] = interval(r, lw, w, rule, level);
      runner.textContent =
        `runner-up: ${D.settings[r]}: ${fmt(shown[r])} (${fmt(rlo)} to ${fmt(rhi)})`;
      runner.dataset.setting = D.settings[r];
    }
    // The ranking: built from numbers, the settings' names set as text (never as markup).
    const rows = order.map((s, i) => `<tr><td>${i + 1}</td><td></td>` +
      `<td class="n">${fmt(score[s])}</td><td class="n">${fmt(shown[s])}</td></tr>`);
    const table = byId("live-ranking");
    table.innerHTML = "<thead><tr><th>rank</th><th>setting</th><th>score</th><th></th></tr>" +
      `</thead><tbody>${rows.join("")}</tbody>`;
    table.tHead.rows[0].cells[2].textContent = `score (${D.score})`;
    table.tHead.rows[0].cells[3].textContent = D.metric;
    table.querySelectorAll("tbody tr").forEach((tr, i) => {
      tr.cells[1].textContent = D.settings[order[i]];
    });
    const pairs = (names, v) => names.map((n, i) => `${n}=${v[i]}`).join(",");
    const parts = [D.command, "--rule", rule, "--weights", shellWord(pairs(D.distortions, dw))];
    if (rule === "cvar") parts.push("--level", String(level));
    parts.push("--landscapes", equal ? "equal" : shellWord(pairs(D.landscapes, lwIn)));
    if (D.options) parts.push(D.options);
    byId("live-command").textContent = parts.join(" ");
  }

  function reset() {
    byId("rule").value = D.rule;
    byId("level").value = String(D.level);
    document.querySelectorAll("input.w-d").forEach((e, i) => { e.value = String(D.weights[i]); });
    const lw = D.landscape_weights || D.landscapes.map(() => 1);
    document.querySelectorAll("input.w-l").forEach((e, i) => { e.value = String(lw[i]); });
    update();
  }

  byId("decision-form").addEventListener("input", update);
  byId("decision-form").addEventListener("change", update);
  byId("reset").addEventListener("click", reset);
  reset();
})();
