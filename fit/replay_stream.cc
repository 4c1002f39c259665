// replay_stream(): replay() in bounded memory for records of any length.
//
// Pass 1 reads the record for its length, rate and means, keeping the
// samples of a short record, which then goes to replay() without a second
// read. Long ones are simulated sample by
// sample (zoh: the same recursion as replay()) or block by block through an
// FIR filter made from the model's response (as measured), and match % and
// the correlation sums are accumulated as the samples go by, with the last
// `lags` samples kept in rings. Memory: the FIR and its FFT buffers (at most
// a few times max_taps doubles) and one block, whatever the record's length.
#include <fftw3.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <deque>
#include <sstream>

#include "fit/detail/replay.h"
#include "fit/replay.h"
#include "ident/error.h"
#include "ident/fftw_lock.h"

namespace benchid::fit {

namespace {

// The model's response applied to the samples as a causal FIR filter with
// `ahead` taps of look-ahead (the acausal sinc tails of a fractional delay),
// by overlap-save. Output lags input by `ahead` samples; finish() flushes.
class FirSimulator {
 public:
  FirSimulator(const RationalModel& m, double rate_hz, std::size_t max_taps, std::string* note) {
    std::size_t taps = 4096;
    std::vector<double> h;
    for (;;) {
      h = impulse_on_grid(m, rate_hz, 2 * taps);
      const std::size_t ahead = taps / 4;
      double total = 0, tail = 0;
      for (std::size_t j = 0; j < h.size(); ++j) {
        total += h[j] * h[j];
        if (j >= taps && j < h.size() - ahead) tail += h[j] * h[j];
      }
      const bool enough = !(total > 0) || tail <= 1e-7 * total;
      if (enough || 2 * taps > max_taps) {
        // below 1e-5 of the energy (3e-3 of the amplitude) the truncation
        // cannot move match % or a correlation visibly: no note
        if (!enough && tail > 1e-5 * total && note) {
          std::ostringstream s;
          s.precision(3);
          s << "the streamed simulation keeps " << taps << " taps (" << static_cast<double>(taps) / rate_hz
            << " s) of the model's impulse response; the rest holds " << tail / total
            << " of its energy (a slowly decaying pole, or a fractional delay's interpolation tails)";
          *note = s.str();
        }
        ahead_ = ahead;
        break;
      }
      taps *= 2;
    }
    // g[j] = h[j - ahead]: taps -ahead..taps-1 of the response, made causal
    const std::size_t n2 = h.size();
    g_len_ = taps + ahead_;
    fft_ = 1;
    while (fft_ < 2 * g_len_) fft_ *= 2;
    block_ = fft_ - g_len_ + 1;
    buf_ = fftw_alloc_real(fft_);
    spec_ = fftw_alloc_complex(fft_ / 2 + 1);
    gspec_.resize(fft_ / 2 + 1);
    fwd_ = locked_plan_dft_r2c_1d(static_cast<int>(fft_), buf_, spec_, FFTW_ESTIMATE);
    inv_ = locked_plan_dft_c2r_1d(static_cast<int>(fft_), spec_, buf_, FFTW_ESTIMATE);
    std::fill(buf_, buf_ + fft_, 0.0);
    for (std::size_t j = 0; j < ahead_; ++j) buf_[j] = h[n2 - ahead_ + j];
    for (std::size_t j = 0; j < taps; ++j) buf_[ahead_ + j] = h[j];
    fftw_execute(fwd_);
    for (std::size_t k = 0; k < gspec_.size(); ++k)
      gspec_[k] = std::complex<double>(spec_[k][0], spec_[k][1]) / static_cast<double>(fft_);
    in_.assign(fft_, 0.0);  // the last g_len_ - 1 inputs, then the new block
  }
  ~FirSimulator() {
    locked_destroy_plan(fwd_);
    locked_destroy_plan(inv_);
    fftw_free(buf_);
    fftw_free(spec_);
  }
  FirSimulator(const FirSimulator&) = delete;
  FirSimulator& operator=(const FirSimulator&) = delete;

  // Takes input samples; appends the outputs that are complete to out.
  void push(const double* u, std::size_t n, std::deque<double>& out) {
    for (std::size_t i = 0; i < n; ++i) {
      in_[g_len_ - 1 + fill_] = u[i];
      if (++fill_ == block_) process(out);
    }
  }
  // Flushes: the outputs of every input pushed so far (the look-ahead is
  // fed with zeros, the record having ended).
  void finish(std::deque<double>& out) {
    const std::vector<double> zeros(ahead_, 0.0);
    push(zeros.data(), zeros.size(), out);
    if (fill_ > 0) process(out);
  }

 private:
  // h[j] for j = 0..n-1 on a grid of n points: the inverse DFT of the
  // model's response at k fs / n (DC and Nyquist lines real, as replay()).
  static std::vector<double> impulse_on_grid(const RationalModel& m, double rate_hz, std::size_t n) {
    std::vector<double> h(n);
    std::vector<std::complex<double>> spec(n / 2 + 1);
    for (std::size_t k = 0; k < spec.size(); ++k) {
      cplx v = m.response(static_cast<double>(k) * rate_hz / static_cast<double>(n));
      if (k == 0 || k == spec.size() - 1) v = v.real();
      spec[k] = v / static_cast<double>(n);
    }
    fftw_plan p = locked_plan_dft_c2r_1d(static_cast<int>(n), reinterpret_cast<fftw_complex*>(spec.data()),
                                                h.data(), FFTW_ESTIMATE);
    fftw_execute(p);
    locked_destroy_plan(p);
    return h;
  }
  void process(std::deque<double>& out) {
    std::copy(in_.begin(), in_.begin() + static_cast<long>(g_len_ - 1 + fill_), buf_);
    std::fill(buf_ + g_len_ - 1 + fill_, buf_ + fft_, 0.0);  // a partial last block
    fftw_execute(fwd_);
    for (std::size_t k = 0; k < gspec_.size(); ++k) {
      const std::complex<double> z = std::complex<double>(spec_[k][0], spec_[k][1]) * gspec_[k];
      spec_[k][0] = z.real(), spec_[k][1] = z.imag();
    }
    fftw_execute(inv_);
    // outputs g_len_-1 .. g_len_-2+fill_ are complete; the first `ahead_`
    // of the whole stream belong to times before the record
    for (std::size_t i = 0; i < fill_; ++i) {
      if (skipped_ < ahead_) {
        ++skipped_;
        continue;
      }
      out.push_back(buf_[g_len_ - 1 + i]);
    }
    std::copy(in_.begin() + static_cast<long>(fill_), in_.begin() + static_cast<long>(fill_ + g_len_ - 1), in_.begin());
    fill_ = 0;
  }

  std::size_t ahead_ = 0, g_len_ = 0, fft_ = 0, block_ = 0, fill_ = 0;
  std::size_t skipped_ = 0;
  double* buf_ = nullptr;
  fftw_complex* spec_ = nullptr;
  fftw_plan fwd_ = nullptr, inv_ = nullptr;
  std::vector<std::complex<double>> gspec_;
  std::vector<double> in_;
};

// Match % and the correlation sums of replay(), accumulated in time order
// over the scored samples (index >= settle); the last `lags` residuals and
// inputs are kept in rings.
class Scores {
 public:
  Scores(std::size_t lags, std::size_t settle) : m_(lags), settle_(settle), e_(2 * (lags + 1)), u_(2 * (lags + 1)) {
    cross_pos_.assign(m_ + 1, 0.0);
    cross_neg_.assign(m_ + 1, 0.0);
    ee_lag_.assign(m_ + 1, 0.0);
    uu_lag_.assign(m_ + 1, 0.0);
  }
  // sample k (mean-removed u, y) and its simulation ys
  void add(std::size_t k, double u, double y, double ys) {
    if (k < settle_) return;
    const double e = y - ys;
    sy_ += y, syy_ += y * y, ee_ += e * e;
    // Each ring is stored twice over (at i and i + m_ + 1), so the last
    // m_ + 1 values are contiguous, newest at `at`, without a modulo.
    const std::size_t len = m_ + 1;
    head_ = head_ + 1 == len ? 0 : head_ + 1;
    e_[head_] = e_[head_ + len] = e;
    u_[head_] = u_[head_ + len] = u;
    const std::size_t at = head_ + len;
    const std::size_t have = std::min(t_, m_);  // earlier scored samples in the rings
    for (std::size_t tau = 0; tau <= have; ++tau) {
      // rho_ee(tau) = sum e[t] e[t - tau]; rho_eu(tau) = sum e[t] u[t - tau] for tau >= 0,
      // and for tau < 0 sum e[t] u[t + |tau|] = sum u[t] e[t - |tau|]
      ee_lag_[tau] += e * e_[at - tau];
      uu_lag_[tau] += u * u_[at - tau];
      cross_pos_[tau] += e * u_[at - tau];
      cross_neg_[tau] += u * e_[at - tau];  // used for tau > 0 only
    }
    ++t_;
  }
  void finish(ReplayResult& r, double practical) const {
    const double n = static_cast<double>(t_);
    r.samples = t_;
    const double ym = sy_ / n;
    const double yy = std::max(0.0, syy_ - n * ym * ym);
    r.match_pct = yy > 0 ? 100.0 * (1.0 - std::sqrt(ee_ / yy)) : 0.0;
    const double sq = std::sqrt(n);
    const double uu = uu_lag_[0];
    const double norm_ee = ee_ > 0 ? ee_ : 0, norm_eu = std::sqrt(ee_ * uu);
    r.whiteness.rho.clear();
    for (std::size_t tau = 1; tau <= m_; ++tau) r.whiteness.rho.push_back(norm_ee > 0 ? ee_lag_[tau] / norm_ee : 0.0);
    r.whiteness.bound = 2.576 / sq;
    detail::judge(r.whiteness, practical);
    r.cross.rho.clear();
    for (long tau = -static_cast<long>(m_); tau <= static_cast<long>(m_); ++tau) {
      const double s = tau < 0 ? cross_neg_[static_cast<std::size_t>(-tau)] : cross_pos_[static_cast<std::size_t>(tau)];
      r.cross.rho.push_back(norm_eu > 0 ? s / norm_eu : 0.0);
    }
    double p = 0;
    for (long tau = -static_cast<long>(m_); tau <= static_cast<long>(m_); ++tau) {
      const auto a = static_cast<std::size_t>(std::labs(tau));
      const double re = norm_ee > 0 ? ee_lag_[a] / norm_ee : 0.0, ru = uu > 0 ? uu_lag_[a] / uu : 0.0;
      p += re * ru;
    }
    r.cross.bound = 2.576 * std::sqrt(std::max(p, 1e-12)) / sq;
    detail::judge(r.cross, practical);
  }

 private:
  std::size_t m_, settle_, t_ = 0, head_ = 0;
  std::vector<double> e_, u_;  // rings of the last m_ + 1 residuals and inputs, each stored twice
  std::vector<double> cross_pos_, cross_neg_, ee_lag_, uu_lag_;
  double sy_ = 0, syy_ = 0, ee_ = 0;
};

}  // namespace

ReplayResult replay_stream(const RationalModel& m, const std::function<std::unique_ptr<ReplaySource>()>& open,
                           const ReplayOptions& o, const StreamReplayOptions& so, const ReplaySink& sink) {
  std::vector<double> ub, yb;
  std::size_t n = 0;
  double su = 0, sy = 0, rate_hz = 0;
  // Pass 1 keeps the samples while the record is short enough to be replayed
  // whole, so a short record is read once; past the limit they are dropped.
  std::vector<double> u, y;
  bool whole = true;
  {
    auto src = open();
    for (std::size_t k; (k = src->next(ub, yb)) > 0; n += k) {
      for (std::size_t i = 0; i < k; ++i) su += ub[i], sy += yb[i];
      if (whole && n + k > so.in_memory_limit) {
        whole = false;
        std::vector<double>().swap(u);
        std::vector<double>().swap(y);
      }
      if (whole) {
        u.insert(u.end(), ub.begin(), ub.begin() + static_cast<long>(k));
        y.insert(y.end(), yb.begin(), yb.begin() + static_cast<long>(k));
      }
    }
    rate_hz = src->rate_hz();
  }
  if (!(rate_hz > 0) || !std::isfinite(rate_hz))
    throw InputError("replay: cannot tell the sampling rate; expected a time column or --rate HZ");
  if (whole) {
    ReplayResult r = replay(m, u, y, rate_hz, o);
    if (sink) sink(0, y, r.simulated);
    return r;
  }
  if (n < 4 * o.lags + 16)
    throw InputError("replay needs at least " + std::to_string(4 * o.lags + 16) + " samples of input and output");
  const double mu = su / static_cast<double>(n), my = sy / static_cast<double>(n);
  ReplayResult r;
  r.streamed = true;
  r.hold = o.hold == Hold::as_measured && m.integrators == 0 ? Hold::as_measured : Hold::zoh;
  r.settle = detail::settle_samples(m, n, rate_hz, o);
  Scores scores(o.lags, r.settle);
  std::unique_ptr<detail::ZohSimulator> zoh;
  std::unique_ptr<FirSimulator> fir;
  if (r.hold == Hold::zoh) zoh = std::make_unique<detail::ZohSimulator>(m, rate_hz);
  else fir = std::make_unique<FirSimulator>(m, rate_hz, so.max_taps, &r.note);
  // samples waiting for their simulation (the FIR's look-ahead), in order
  std::deque<double> wait_u, wait_y, sim;
  std::size_t done = 0;
  std::vector<double> out_y, out_s;
  const auto drain = [&](bool all) {
    while (!sim.empty() && !wait_u.empty()) {
      const double u = wait_u.front(), y = wait_y.front(), ys = sim.front();
      wait_u.pop_front(), wait_y.pop_front(), sim.pop_front();
      scores.add(done, u, y, ys);
      if (sink) {
        out_y.push_back(y + my), out_s.push_back(ys + my);
        if (out_y.size() == 65536) {
          sink(done + 1 - out_y.size(), out_y, out_s);
          out_y.clear(), out_s.clear();
        }
      }
      ++done;
    }
    if (all && sink && !out_y.empty()) sink(done - out_y.size(), out_y, out_s);
  };
  auto src = open();
  std::size_t seen = 0;
  for (std::size_t k; (k = src->next(ub, yb)) > 0;) {
    seen += k;
    for (std::size_t i = 0; i < k; ++i) {
      ub[i] -= mu, yb[i] -= my;
      wait_u.push_back(ub[i]), wait_y.push_back(yb[i]);
      if (zoh) sim.push_back(zoh->step(ub[i]));
    }
    if (fir) fir->push(ub.data(), k, sim);
    drain(false);
  }
  if (seen != n)
    throw InputError("replay: the record changed between the two passes (" + std::to_string(n) + " then " +
                     std::to_string(seen) + " samples); expected a file that is not being written");
  if (fir) fir->finish(sim);
  drain(true);
  scores.finish(r, o.practical);
  detail::set_verdict(r);
  return r;
}

}  // namespace benchid::fit
