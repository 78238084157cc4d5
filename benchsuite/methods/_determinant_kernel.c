/* The loops of benchsuite.methods.determinant.ExponentialProduct (see that module's docstring).
 *
 * Built at install time by setup.py as benchsuite/methods/_determinant_kernel<EXT_SUFFIX> (optional:
 * an install without a compiler still succeeds), or at first use into the user's cache; loaded with
 * ctypes, so this file has no Python module initialisation.  Arrays are C-contiguous float64/int64
 * whose lengths determinant.py checks before every call:
 *   psi, lam: dimension;  off: nf + 1 (off[0] = 0, ascending);  ii, jj, sg: off[nf];
 *   cs, sn, gf: nf;  psi/hpsi of bs_pool_gradients: dimension;  every ii[k], jj[k] in 0 .. dimension - 1
 *   (bs_pool_gradients: int32 ii, jj of length off[nf], ii[k] and jj[k] or ~jj[k] in 0 .. dimension - 1).
 */
#include <stdint.h>

/* SHA-256 of this file, passed by the build (setup.py, determinant.py's first-use build): a loaded
 * library built from another version of the source is refused. */
#ifndef BS_SOURCE_SHA256
#define BS_SOURCE_SHA256 "unknown"
#endif
const char *bs_source_sha256(void) { return BS_SOURCE_SHA256; }

/* psi_I <- c psi_I + s sg psi_J,  psi_J <- c psi_J - s sg psi_I  for every pair of every factor */
void bs_forward(double *psi, int64_t nf, const int64_t *off, const int64_t *ii, const int64_t *jj,
                const double *sg, const double *cs, const double *sn)
{
    for (int64_t f = 0; f < nf; f++) {
        const double c = cs[f], s = sn[f];
        if (s == 0.0) continue;
        for (int64_t k = off[f]; k < off[f + 1]; k++) {
            const int64_t i = ii[k], j = jj[k];
            const double a = psi[i], b = psi[j], t = s * sg[k];
            psi[i] = c * a + t * b;
            psi[j] = c * b - t * a;
        }
    }
}

/* reverse sweep: gf[f] = 2 <lam|tau_f|psi>, then both vectors rotated back by exp(-theta_f tau_f) */
void bs_backward(double *psi, double *lam, int64_t nf, const int64_t *off, const int64_t *ii,
                 const int64_t *jj, const double *sg, const double *cs, const double *sn, double *gf)
{
    for (int64_t f = nf - 1; f >= 0; f--) {
        const double c = cs[f], s = -sn[f];
        double g = 0.0;
        for (int64_t k = off[f]; k < off[f + 1]; k++) {
            const int64_t i = ii[k], j = jj[k];
            const double w = sg[k], pi = psi[i], pj = psi[j], li = lam[i], lj = lam[j];
            g += w * (li * pj - lj * pi);
            if (s != 0.0) {
                const double t = s * w;
                psi[i] = c * pi + t * pj;
                psi[j] = c * pj - t * pi;
                lam[i] = c * li + t * lj;
                lam[j] = c * lj - t * li;
            }
        }
        gf[f] = 2.0 * g;
    }
}

/* pool gradients at one state: gf[m] = 2 <hpsi|tau_m|psi> = 2 sum_k sigma_k (hpsi[I] psi[J] - hpsi[J] psi[I])
 * over the pairs off[m] .. off[m+1] of generator m (the commutator form <psi|[H, tau_m]|psi>).  Compact
 * pairs (a third of the memory traffic of the product's tables): I = ii[k]; jj[k] >= 0 is J with
 * sigma = +1, jj[k] < 0 is ~J (bitwise complement) with sigma = -1. */
void bs_pool_gradients(const double *psi, const double *hpsi, int64_t nf, const int64_t *off,
                       const int32_t *ii, const int32_t *jj, double *gf)
{
    for (int64_t f = 0; f < nf; f++) {
        double g = 0.0;
        for (int64_t k = off[f]; k < off[f + 1]; k++) {
            const int32_t i = ii[k], e = jj[k];
            const int32_t j = e >= 0 ? e : ~e;
            const double t = hpsi[i] * psi[j] - hpsi[j] * psi[i];
            g += e >= 0 ? t : -t;
        }
        gf[f] = 2.0 * g;
    }
}
