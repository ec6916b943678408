// Choosing the most-unstable parcel by its CAPE (METHODS "Parcels, free convection and
// the lift needed"): among the flagged parcels of the source layer, the one with the
// largest CAPE; exact ties go to the lowest level. Pure and header-only, so the rule and
// its pruning can be tested apart from the ascents that give the CAPE.
#pragma once

#include <algorithm>
#include <cstddef>
#include <vector>

namespace latentlift::detail {

/// A flagged source-layer parcel as the choice sees it.
struct MuCandidate {
  int position;      // bottom-up position of its source level (lower = nearer the ground)
  double theta_w_k;  // its wet-bulb potential temperature, K
  double lcl_lnp;    // ln of its LCL pressure (Pa): larger = lower LCL
};

/// The position of the candidate with the largest cape_of(position) (J/kg), exact ties to the
/// lowest position; -1 when there is none. Above its LCL a parcel rides the pseudo-adiabat of
/// its theta_w, and its CAPE is its positive buoyancy area from the LCL up (nothing is buoyant
/// between LCL and LFC, or above the EL). At any pressure buoyancy grows with theta_w, so a
/// parcel whose theta_w is at most another's and whose LCL lies at or above the other's has
/// at most the other's CAPE: that CAPE bounds it. Candidates are visited by decreasing theta_w
/// (lower position first on equal theta_w); cape_of is not called for a candidate bounded by
/// one visited before it that is also lower (a higher one might tie with it). Reorders
/// `candidates`.
template <class CapeOf>
int choose_most_unstable(std::vector<MuCandidate>& candidates, CapeOf&& cape_of) {
  std::sort(candidates.begin(), candidates.end(), [](const MuCandidate& a, const MuCandidate& b) {
    return a.theta_w_k > b.theta_w_k || (a.theta_w_k == b.theta_w_k && a.position < b.position);
  });
  int best = -1;
  double best_cape = 0.0;
  std::size_t n_lifted = 0;  // candidates[0, n_lifted) are the ones lifted so far, in visiting order
  for (std::size_t i = 0; i < candidates.size(); ++i) {
    const MuCandidate c = candidates[i];
    bool bounded = false;
    for (std::size_t j = 0; j < n_lifted && !bounded; ++j)
      bounded = candidates[j].lcl_lnp >= c.lcl_lnp && candidates[j].position < c.position;
    if (bounded) continue;
    candidates[n_lifted++] = c;
    const double cape = cape_of(c.position);
    if (best < 0 || cape > best_cape || (cape == best_cape && c.position < best)) {
      best = c.position;
      best_cape = cape;
    }
  }
  return best;
}

}  // namespace latentlift::detail
