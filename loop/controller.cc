#include "loop/controller.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <map>
#include <numbers>
#include <vector>

#include "fit/discretize.h"
#include "ident/error.h"
#include "ident/json_file.h"

namespace benchid::loop {

using benchid::fmt_num;
using benchid::InputError;
using fit::cplx;

namespace {

double number(const std::string& text, const std::string& what) {
  double v = 0;
  const std::string s = !text.empty() && text[0] == '+' ? text.substr(1) : text;
  auto r = std::from_chars(s.data(), s.data() + s.size(), v);
  if (s.empty() || r.ec != std::errc() || r.ptr != s.data() + s.size() || !std::isfinite(v))
    throw InputError("controller: " + what + " '" + text + "' is not a number");
  return v;
}

cplx complex_number(std::string s, const std::string& what) {
  // a, a+bj, a-bj, bj
  if (!s.empty() && (s.back() == 'j' || s.back() == 'i')) {
    s.pop_back();
    std::size_t split = std::string::npos;
    for (std::size_t i = 1; i < s.size(); ++i)
      if ((s[i] == '+' || s[i] == '-') && s[i - 1] != 'e' && s[i - 1] != 'E') split = i;
    if (split == std::string::npos) return {0.0, number(s, what)};
    return {number(s.substr(0, split), what), number(s.substr(split), what)};
  }
  return {number(s, what), 0.0};
}

// name -> list of items
std::map<std::string, std::vector<std::string>> params(const std::string& text, const std::string& form) {
  std::map<std::string, std::vector<std::string>> p;
  std::string current;
  std::size_t i = 0;
  while (i <= text.size()) {
    std::size_t j = text.find_first_of(",;", i);
    if (j == std::string::npos) j = text.size();
    const std::string tok = text.substr(i, j - i);
    const auto eq = tok.find('=');
    if (eq != std::string::npos) {
      current = tok.substr(0, eq);
      if (p.count(current)) throw InputError("controller " + form + ": parameter '" + current + "' given twice");
      p[current].push_back(tok.substr(eq + 1));
    } else if (!tok.empty()) {
      if (current.empty()) throw InputError("controller " + form + ": '" + tok + "' has no name; expected name=value");
      p[current].push_back(tok);
    }
    i = j + 1;
  }
  return p;
}

double get(std::map<std::string, std::vector<std::string>>& p, const std::string& form, const std::string& name,
           bool required, double def = 0) {
  auto it = p.find(name);
  if (it == p.end()) {
    if (required) throw InputError("controller " + form + ": missing parameter '" + name + "'");
    return def;
  }
  if (it->second.size() != 1) throw InputError("controller " + form + ": '" + name + "' takes one value");
  const double v = number(it->second[0], form + " " + name);
  p.erase(it);
  return v;
}

void no_leftovers(const std::map<std::string, std::vector<std::string>>& p, const std::string& form,
                  const std::string& known) {
  if (!p.empty()) throw InputError("controller " + form + ": unknown parameter '" + p.begin()->first + "'; expected " + known);
}

fit::Zpk from_poly(const std::vector<double>& num, const std::vector<double>& den, const std::string& form) {
  if (den.empty() || std::all_of(den.begin(), den.end(), [](double v) { return v == 0; }))
    throw InputError("controller " + form + ": the denominator is zero; expected a non-zero polynomial");
  auto trim = [](std::vector<double> v) {
    while (v.size() > 1 && v.front() == 0) v.erase(v.begin());
    return v;
  };
  const std::vector<double> n = trim(num), d = trim(den);
  if (n.size() > d.size())
    throw InputError("controller " + form + ": numerator degree " + std::to_string(n.size() - 1) + " above denominator degree " +
                     std::to_string(d.size() - 1) + "; expected a proper controller (add a filter)");
  fit::Zpk z;
  z.zeros = fit::polynomial_roots(n);
  z.poles = fit::polynomial_roots(d);
  z.gain = n.front() / d.front();
  return z;
}

// set by factor() when a pid factor asks for the setpoint-free form: the
// reference path's factor ki/s replaces that pid in the product
struct FactorResult {
  fit::Zpk zpk;
  bool setpoint_free = false;
  fit::Zpk reference;
};

fit::Zpk factor(const std::string& item, FactorResult* extra = nullptr) {
  const auto colon = item.find(':');
  if (colon == std::string::npos)
    throw InputError("controller '" + item + "': expected FORM:PARAMS with FORM one of gain, pid, lead, lag, notch, poly, roots");
  const std::string form = item.substr(0, colon);
  auto p = params(item.substr(colon + 1), form);
  const double two_pi = 2 * std::numbers::pi;
  if (form == "gain") {
    const double k = get(p, form, "k", true);
    no_leftovers(p, form, "k");
    return fit::Zpk{{}, {}, k};
  }
  if (form == "pid") {
    bool free_form = false;
    if (auto it = p.find("setpoint"); it != p.end()) {
      if (it->second.size() != 1 || (it->second[0] != "free" && it->second[0] != "error"))
        throw InputError("controller pid: setpoint must be 'free' (P and D on the measurement) or 'error'");
      free_form = it->second[0] == "free";
      p.erase(it);
    }
    const double kp = get(p, form, "kp", false), ki = get(p, form, "ki", false), kd = get(p, form, "kd", false),
                 tf = get(p, form, "tf", false);
    no_leftovers(p, form, "kp, ki, kd, tf, setpoint");
    if (free_form) {
      if (!(ki != 0)) throw InputError("controller pid: setpoint=free needs ki: the reference enters through ki/s only");
      if (extra) extra->setpoint_free = true, extra->reference = fit::Zpk{{}, {0.0}, ki};
    }
    if (kd != 0 && !(tf > 0))
      throw InputError("controller pid: kd = " + fmt_num(kd) + " without a derivative filter is improper; expected tf > 0 s");
    if (tf < 0) throw InputError("controller pid: tf = " + fmt_num(tf) + " s; expected tf >= 0");
    if (kp == 0 && ki == 0 && kd == 0) throw InputError("controller pid: every gain is 0; expected kp, ki or kd");
    // [kp s (tf s + 1) + ki (tf s + 1) + kd s^2] / [s (tf s + 1)], dropping what is absent
    std::vector<double> num{kp * tf + kd, kp + ki * tf, ki}, den{tf, 1.0, 0.0};
    if (ki == 0) num.pop_back(), den.pop_back();
    return from_poly(num, den, form);
  }
  if (form == "lead" || form == "lag") {
    const double fz = get(p, form, "z", true), fp = get(p, form, "p", true), k = get(p, form, "k", false, 1.0);
    no_leftovers(p, form, "z, p, k");
    if (!(fz > 0 && fp > 0)) throw InputError("controller " + form + ": z and p must be positive frequencies in Hz");
    const double wz = two_pi * fz, wp = two_pi * fp;
    return fit::Zpk{{-wz}, {-wp}, k * wp / wz};
  }
  if (form == "notch") {
    const double f = get(p, form, "f", true), width = get(p, form, "width", true), depth = get(p, form, "depth", true);
    no_leftovers(p, form, "f, width, depth");
    if (!(f > 0 && width > 0 && width < 2 * f)) throw InputError("controller notch: expected f > 0 Hz and 0 < width < 2 f Hz");
    if (!(depth > 0)) throw InputError("controller notch: depth = " + fmt_num(depth) + " dB; expected a positive attenuation in dB");
    const double w = two_pi * f, zp = width / (2 * f), zz = zp * std::pow(10.0, -depth / 20);
    return from_poly({1.0, 2 * zz * w, w * w}, {1.0, 2 * zp * w, w * w}, form);
  }
  if (form == "poly") {
    auto list = [&](const char* name) {
      auto it = p.find(name);
      if (it == p.end()) throw InputError(std::string("controller poly: missing parameter '") + name + "'");
      std::vector<double> v;
      for (const auto& s : it->second) v.push_back(number(s, std::string("poly ") + name));
      p.erase(it);
      return v;
    };
    const auto num = list("num"), den = list("den");
    no_leftovers(p, form, "num, den");
    return from_poly(num, den, form);
  }
  if (form == "roots") {
    auto list = [&](const char* name) {
      std::vector<cplx> v;
      auto it = p.find(name);
      if (it == p.end()) return v;
      for (const auto& s : it->second) {
        if (s.empty()) continue;
        const cplx c = complex_number(s, std::string("roots ") + name);
        v.push_back(c);
      }
      p.erase(it);
      // conjugates added where missing (a real controller)
      const std::size_t n = v.size();
      for (std::size_t i = 0; i < n; ++i)
        if (v[i].imag() != 0 && std::find(v.begin(), v.end(), std::conj(v[i])) == v.end()) v.push_back(std::conj(v[i]));
      return v;
    };
    fit::Zpk z;
    z.zeros = list("zeros");
    z.poles = list("poles");
    z.gain = get(p, form, "k", false, 1.0);
    no_leftovers(p, form, "zeros, poles, k");
    if (z.zeros.size() > z.poles.size()) throw InputError("controller roots: more zeros than poles; expected a proper controller");
    return z;
  }
  throw InputError("controller form '" + form + "' is unknown; expected gain, pid, lead, lag, notch, poly or roots");
}

}  // namespace

Controller parse_controller(const std::string& spec) {
  if (spec.empty()) throw InputError("controller spec is empty; expected e.g. pid:kp=1,ki=10");
  Controller c;
  c.spec = spec;
  std::string body = spec, tail;
  const auto at = spec.find('@');
  if (at != std::string::npos) body = spec.substr(0, at), tail = spec.substr(at + 1);
  fit::Zpk total{{}, {}, 1.0}, reference{{}, {}, 1.0};
  std::size_t i = 0;
  while (i <= body.size()) {
    std::size_t j = body.find('*', i);
    if (j == std::string::npos) j = body.size();
    FactorResult extra;
    const fit::Zpk z = factor(body.substr(i, j - i), &extra);
    total.zeros.insert(total.zeros.end(), z.zeros.begin(), z.zeros.end());
    total.poles.insert(total.poles.end(), z.poles.begin(), z.poles.end());
    total.gain *= z.gain;
    const fit::Zpk& rz = extra.setpoint_free ? extra.reference : z;
    if (extra.setpoint_free) c.setpoint_free = true;
    reference.zeros.insert(reference.zeros.end(), rz.zeros.begin(), rz.zeros.end());
    reference.poles.insert(reference.poles.end(), rz.poles.begin(), rz.poles.end());
    reference.gain *= rz.gain;
    i = j + 1;
  }
  if (c.setpoint_free) {
    if (spec.find('@') != std::string::npos)
      throw InputError("controller '" + spec + "': the setpoint-free form is continuous only here (no @dt)");
    c.reference_path = fit::from_zpk(reference);
  }
  if (total.zeros.size() > total.poles.size())
    throw InputError("controller '" + spec + "' is improper (" + std::to_string(total.zeros.size()) + " zeros, " +
                     std::to_string(total.poles.size()) + " poles); expected no more zeros than poles");
  // zeros at the origin cancel poles there
  for (auto z = total.zeros.begin(); z != total.zeros.end();) {
    auto p = std::find_if(total.poles.begin(), total.poles.end(), [](cplx q) { return std::abs(q) == 0; });
    if (std::abs(*z) == 0 && p != total.poles.end()) {
      total.poles.erase(p);
      z = total.zeros.erase(z);
    } else {
      ++z;
    }
  }
  // one pole at the origin is a simple pole of the pole-residue form; two or
  // more (a double integrator) are kept apart as integrators, and the rest
  // must then be proper on its own
  const auto at_origin = std::count_if(total.poles.begin(), total.poles.end(), [](cplx q) { return std::abs(q) == 0; });
  if (at_origin <= 1) {
    c.model = fit::from_zpk(total);
  } else {
    fit::Zpk rest{total.zeros, {}, total.gain};
    for (const cplx& p : total.poles)
      if (std::abs(p) != 0) rest.poles.push_back(p);
    if (rest.zeros.size() > rest.poles.size())
      throw InputError("controller '" + spec + "': a double integrator with zeros in excess is not supported yet");
    c.model = fit::from_zpk(rest);
    c.model.integrators = static_cast<int>(at_origin);
  }
  if (!tail.empty()) {
    auto p = params(tail, "@");
    const double dt = get(p, "@", "dt", false, 0.0), prewarp = get(p, "@", "prewarp", false, 0.0),
                 delay = get(p, "@", "delay", false, 0.0);
    no_leftovers(p, "@", "dt, prewarp, delay");
    if (dt < 0 || !(delay >= 0)) throw InputError("controller '" + spec + "': dt and delay must be >= 0 s");
    if (tail.find("dt=") != std::string::npos && !(dt > 0))
      throw InputError("controller '" + spec + "': dt = " + fmt_num(dt) + " s; expected a positive sample period");
    c.model.delay_s = delay;
    if (dt > 0) {
      fit::DiscretizeOptions o;
      o.method = fit::Discretization::tustin;
      o.sample_time_s = dt;
      o.prewarp_hz = prewarp;
      c.model = fit::discretize(c.model, o).model;
      // the computation delay exactly as stated (half a sample is common),
      // not rounded to whole samples as a discretised plant's delay is: here
      // it only ever multiplies the response by e^(-j w delay)
      c.model.delay_s = delay;
    }
  }
  return c;
}

std::string controller_spec(const std::string& arg) {
  if (arg.size() < 5 || arg.compare(arg.size() - 5, 5, ".json") != 0) return arg;
  const nlohmann::json j = read_json_file(arg, "a controller JSON {\"format\": \"benchid.controller/1\", \"spec\": ...}");
  const auto is_str = [&](const char* k) { return j.contains(k) && j[k].is_string(); };
  if (!j.is_object() || !is_str("format") || j["format"].get<std::string>() != "benchid.controller/1" || !is_str("spec"))
    throw InputError(arg + ": expected {\"format\": \"benchid.controller/1\", \"spec\": \"FORM:PARAMS...\"}");
  const std::string spec = j["spec"].get<std::string>();
  try {
    parse_controller(spec);  // a bad spec is refused naming the file it came from
  } catch (const InputError& e) {
    throw InputError(where(arg) + "spec '" + spec.substr(0, 80) + "': " + e.what());
  }
  return spec;
}

}  // namespace benchid::loop
