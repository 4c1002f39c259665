#include "ident/fftw_lock.h"
#include "ident/sweep_distortion.h"

#include <fftw3.h>

#include <cmath>
#include <complex>
#include <limits>

#include "ident/error.h"

namespace benchid::ident {

namespace {
using cvec = std::vector<std::complex<double>>;

cvec forward(const std::vector<double>& x, std::size_t len) {
  std::vector<double> in(len, 0.0);
  std::copy(x.begin(), x.begin() + static_cast<std::ptrdiff_t>(std::min(len, x.size())), in.begin());
  cvec out(len / 2 + 1);
  fftw_plan p = locked_plan_dft_r2c_1d(static_cast<int>(len), in.data(), reinterpret_cast<fftw_complex*>(out.data()),
                                     FFTW_ESTIMATE);
  fftw_execute(p);
  locked_destroy_plan(p);
  return out;
}

std::vector<double> inverse(cvec spec, std::size_t len) {
  std::vector<double> out(len);
  fftw_plan p = locked_plan_dft_c2r_1d(static_cast<int>(len), reinterpret_cast<fftw_complex*>(spec.data()), out.data(),
                                     FFTW_ESTIMATE);
  fftw_execute(p);
  locked_destroy_plan(p);
  for (double& v : out) v /= static_cast<double>(len);
  return out;
}
}  // namespace

SweepHarmonics sweep_harmonics(const std::vector<double>& u, const std::vector<double>& y, double rate_hz,
                               const SweepOptions& sw, bool periodic, int max_order) {
  if (!sw.logarithmic || !(sw.f1_hz > sw.f0_hz))
    throw InputError("harmonic distortion needs an upward exponential sweep (logchirp with f1 > f0)");
  if (u.size() != y.size() || u.size() < 64) throw InputError("harmonic distortion: expected equal records of >= 64 samples");
  const std::size_t len = periodic ? u.size() : 2 * u.size();
  const cvec U = forward(u, len), Y = forward(y, len);
  double umax = 0;
  for (const auto& z : U) umax = std::max(umax, std::norm(z));
  // band-limited inverse: outside the sweep the input holds only splatter
  // (the jump of a repeated sweep, the ends of a single one), and dividing by
  // it would blow harmonic products up, so the response there is left out
  const double df0 = rate_hz / static_cast<double>(len);
  cvec H(U.size());
  for (std::size_t i = 0; i < U.size(); ++i) {
    const double f = static_cast<double>(i) * df0;
    if (f < sw.f0_hz || f > sw.f1_hz) continue;
    H[i] = Y[i] * std::conj(U[i]) / (std::norm(U[i]) + 1e-8 * umax);
  }
  const std::vector<double> h = inverse(H, len);

  const double lr = std::log(sw.f1_hz / sw.f0_hz);
  auto dt = [&](int k) { return k <= 1 ? 0.0 : sw.duration_s * std::log(static_cast<double>(k)) / lr; };
  const double span_s = static_cast<double>(len) / rate_hz;
  // the windows must fit in the record: harmonic max_order+1 sits at -dt
  while (max_order >= 2 && dt(max_order + 1) > 0.5 * span_s) --max_order;
  SweepHarmonics r;
  r.max_order = max_order;
  if (max_order < 2) return r;
  // window of harmonic k in time (s, negative = before the linear response):
  // [-(dt_k + dt_{k+1})/2, -(dt_k + dt_{k-1})/2); the linear one runs from
  // -dt_2/2 to the start of the last harmonic's window, wrapped.
  auto cut = [&](double from_s, double to_s, double shift_s) {
    std::vector<double> w(len, 0.0);
    const auto a = static_cast<long long>(std::floor(from_s * rate_hz));
    const auto b = static_cast<long long>(std::floor(to_s * rate_hz));
    const auto sh = static_cast<long long>(std::llround(shift_s * rate_hz));
    const auto n = static_cast<long long>(len);
    for (long long i = a; i < b; ++i) {
      const long long src = ((i % n) + n) % n, dst = (((i + sh) % n) + n) % n;
      w[static_cast<std::size_t>(dst)] = h[static_cast<std::size_t>(src)];
    }
    return forward(w, len);
  };
  const double last_start = -(dt(max_order) + dt(max_order + 1)) / 2;
  const cvec H1 = cut(-dt(2) / 2, span_s + last_start, 0.0);
  std::vector<cvec> Hk;
  for (int k = 2; k <= max_order; ++k) Hk.push_back(cut(-(dt(k) + dt(k + 1)) / 2, -(dt(k) + dt(k - 1)) / 2, dt(k)));

  const double df = df0;
  // frequencies the sweep passes while fading in or out are left out, with
  // a 5 % margin: there the input is weaker than the law says
  const double f_first = sw.f0_hz * std::pow(sw.f1_hz / sw.f0_hz, sw.fade_s / sw.duration_s) * 1.05;
  const double f_last = sw.f1_hz * std::pow(sw.f1_hz / sw.f0_hz, -sw.fade_s / sw.duration_s) / 1.05;
  auto bin = [&](double f) { return static_cast<std::size_t>(std::llround(f / df)); };
  const double nan = std::numeric_limits<double>::quiet_NaN();
  std::vector<double> tot_h(Hk.size(), 0.0), tot_1(Hk.size(), 0.0);
  for (double lo = sw.f0_hz; lo < sw.f1_hz / 2; lo *= 2) {
    SweepHarmonics::Band band;
    band.f_lo_hz = lo;
    band.f_hi_hz = std::min(2 * lo, sw.f1_hz);
    for (int k = 2; k <= max_order; ++k) {
      double ph = 0, p1 = 0;
      for (std::size_t i = bin(band.f_lo_hz); i < bin(band.f_hi_hz); ++i) {
        const double f = static_cast<double>(i) * df;
        if (f < f_first || k * f > f_last || k * f >= rate_hz / 2) continue;
        ph += std::norm(Hk[static_cast<std::size_t>(k - 2)][bin(k * f)]);
        p1 += std::norm(H1[i]);
      }
      band.ratio_db.push_back(p1 > 0 ? 10 * std::log10(std::max(ph, 1e-300) / p1) : nan);
      tot_h[static_cast<std::size_t>(k - 2)] += ph;
      tot_1[static_cast<std::size_t>(k - 2)] += p1;
    }
    r.bands.push_back(band);
  }
  for (std::size_t i = 0; i < tot_h.size(); ++i)
    r.overall_db.push_back(tot_1[i] > 0 ? 10 * std::log10(std::max(tot_h[i], 1e-300) / tot_1[i]) : nan);
  return r;
}

}  // namespace benchid::ident
