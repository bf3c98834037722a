// In-app help: what each discovery method does, what each measure means and what each verdict
// says (and does not say). Plain words, our own.

export type HelpTopic = 'sefa' | 'pca' | 'boundary' | 'means' | 'leakage' | 'path-length' | 'safe-range' | 'probes' | 'verdicts' | 'heatmap';

export const HELP: Record<HelpTopic, { title: string; body: string[] }> = {
  sefa: { title: 'Closed-form factorization', body: ['Reads the generator’s first weights acting on the latent and takes the directions they stretch most (eigenvectors of WᵀW). Needs no sampling and no labels.', 'Finds what the network is most sensitive to; the names are yours to give after looking at the strips.'] },
  pca: { title: 'PCA of sampled W', body: ['Samples many latents, maps them to W and takes the principal components of their spread.', 'Components follow how codes vary, which is often, but not always, how images vary.'] },
  boundary: { title: 'Linear attribute boundary', body: ['Scores sampled images for one attribute and fits a linear boundary between high and low scores; its normal is the direction.', 'Aimed at a named attribute, but it carries whatever correlates with that attribute in the samples.'] },
  means: { title: 'Difference of tagged seeds', body: ['The mean latent of seeds you tagged “has” minus the mean of those tagged “lacks”.', 'A few well-chosen seeds of each kind are enough; tag them on the workbench.'] },
  leakage: { title: 'Leakage', body: ['How much a direction moves attributes other than its target, relative to how much it moves the target, at the reference strength (±2 σ by default), with a 95% bootstrap interval over the probes.', 'Below 0.15 passes, 0.35 or more fails, between needs review.'] },
  'path-length': { title: 'Path length', body: ['Perceptual path length along the direction: the image distance (1 − SSIM by default) between images a small step apart, divided by the step squared. Spikes mark strengths where the image jumps.', 'Unit: distance per σ² of strength.'] },
  'safe-range': { title: 'Safe range', body: ['The strengths (in σ of the latent projection) within which leakage stays below the failing mark and the path has no spikes. Sliders draw it on their track; variant sets and packs refuse strengths outside it unless forced with a reason.'] },
  probes: { title: 'Probes', body: ['Random latent codes (plus any pinned seeds) on which every direction is measured. More probes, narrower intervals: approval needs an audit of at least 30 probes.'] },
  verdicts: { title: 'Verdicts and sign-off', body: ['Pass: leakage and its interval below 0.15, no path spikes, at least 30 probes. Needs review: between the marks, or the interval too wide to tell. Fail: leakage at or above 0.35, or the image breaks inside ±3 σ.', 'Approval needs a passing audit of the direction as it is now. Approving anything else is possible only with a written reason, recorded as an override in the review log and the pack.', 'An audit measures only what it has scorers for, on its probes; a pass says nothing about the rest.'] },
  heatmap: { title: 'Dependency heatmap', body: ['Rows: directions; columns: attributes. Each cell is the mean change of the attribute, in its own σ, at the reference strength. The colour scale covers the largest value shown.'] },
};
