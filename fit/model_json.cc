#include "fit/model_json.h"

#include <cmath>
#include <nlohmann/json.hpp>

#include "ident/error.h"
#include "ident/json_file.h"

namespace benchid::fit {

using nlohmann::json;
using benchid::InputError;
using benchid::where;

namespace {
json pairs(const std::vector<cplx>& v) {
  json a = json::array();
  for (const cplx& z : v) a.push_back({z.real(), z.imag()});
  return a;
}
json number_or_null(double v) { return std::isfinite(v) ? json(v) : json(nullptr); }
}  // namespace

std::string model_json(const RationalModel& m, const FitSummary* fit) {
  json j;
  j["format"] = "benchid.model/1";
  j["domain"] = m.domain == Domain::s ? "s" : "z";
  j["sample_time_s"] = m.domain == Domain::s ? json(nullptr) : json(m.sample_time_s);
  j["delay_s"] = m.delay_s;
  j["poles"] = pairs(m.poles);
  j["residues"] = pairs(m.residues);
  j["direct"] = m.direct;
  j["proportional"] = m.proportional;
  j["integrators"] = m.integrators;
  j["reflected_poles"] = m.reflected;
  const Zpk z = m.zpk();
  j["zeros"] = pairs(z.zeros);
  j["gain"] = z.gain;
  const Polynomial p = m.polynomial();
  j["num"] = p.num;
  j["den"] = p.den;
  j["num_den_note"] = "convenience only; ill-conditioned above modest orders: the pole-residue form is the model";
  j["dc_gain"] = number_or_null(m.dc_gain());
  if (fit) {
    j["fit"] = {{"order", fit->order},
                {"band_hz", {fit->band_lo_hz, fit->band_hi_hz}},
                {"points", fit->points},
                {"left_out", fit->left_out},
                {"weighting", fit->weighting},
                {"nrmse", fit->nrmse},
                {"max_err_db", fit->max_err_db},
                {"max_err_deg", fit->max_err_deg},
                {"chi2", fit->chi2},
                {"dof", fit->dof},
                {"iterations", fit->iterations},
                {"converged", fit->converged},
                {"source", fit->source}};
  }
  return j.dump(2) + "\n";
}

RationalModel read_model_json(const std::string& path) {
  const json j = read_json_file(path, "a model from 'benchid fit'");
  auto bad = [&](const std::string& w) { throw InputError(where(path) + w); };
  const auto text = [&](const char* key, const char* def) -> std::string {
    if (!j.contains(key)) return def;
    if (!j[key].is_string()) bad(std::string(key) + " is " + j[key].dump().substr(0, 30) + "; expected a string");
    return j[key].get<std::string>();
  };
  if (!j.is_object() || text("format", "") != "benchid.model/1")
    bad("\"format\" is not \"benchid.model/1\"; expected a model from 'benchid fit'");
  RationalModel m;
  const std::string dom = text("domain", "s");
  if (dom != "s" && dom != "z") bad("domain '" + dom + "'; expected \"s\" or \"z\"");
  m.domain = dom == "s" ? Domain::s : Domain::z;
  auto num = [&](const char* key, double def) {
    if (!j.contains(key) || j[key].is_null()) return def;
    if (!j[key].is_number()) bad(std::string(key) + " is not a number");
    const double v = j[key].get<double>();
    if (!std::isfinite(v)) bad(std::string(key) + " is not finite");
    return v;
  };
  m.sample_time_s = num("sample_time_s", 0);
  if (m.domain == Domain::z && !(m.sample_time_s > 0)) bad("a z-domain model needs sample_time_s > 0");
  m.delay_s = num("delay_s", 0);
  if (m.delay_s < 0) bad("delay_s is negative; expected >= 0 s");
  m.direct = num("direct", 0);
  m.proportional = num("proportional", 0);
  const double integrators = num("integrators", 0);
  if (!(integrators >= 0 && integrators <= 8 && integrators == std::floor(integrators)))
    bad("integrators " + j["integrators"].dump().substr(0, 30) + "; expected a whole number 0..8");
  m.integrators = static_cast<int>(integrators);
  auto read_pairs = [&](const char* key) {
    std::vector<cplx> v;
    if (!j.contains(key)) return v;
    if (!j[key].is_array()) bad(std::string(key) + " is not an array of [re, im] pairs");
    for (const json& e : j[key]) {
      if (!e.is_array() || e.size() != 2 || !e[0].is_number() || !e[1].is_number())
        bad(std::string(key) + " holds " + e.dump().substr(0, 30) + "; expected [re, im]");
      const cplx z(e[0].get<double>(), e[1].get<double>());
      if (!std::isfinite(z.real()) || !std::isfinite(z.imag())) bad(std::string(key) + " holds a non-finite value");
      v.push_back(z);
    }
    return v;
  };
  m.poles = read_pairs("poles");
  m.residues = read_pairs("residues");
  if (m.poles.size() != m.residues.size())
    bad(std::to_string(m.poles.size()) + " poles but " + std::to_string(m.residues.size()) +
        " residues; expected one residue per pole");
  if (m.poles.empty() && m.integrators == 0 && m.direct == 0 && m.proportional == 0)
    bad("the model has no poles and no terms; expected a model from 'benchid fit'");
  return m;
}

}  // namespace benchid::fit
