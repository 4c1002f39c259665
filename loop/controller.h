// Controllers from a SPEC string (DESIGN.md, "Command line"):
//   FORM:PARAMS[*FORM:PARAMS...][@dt=SECONDS[,prewarp=HZ][,delay=SECONDS]]
// parameters name=value separated by ',' or ';'; a list's items are
// separated by ',' and a new parameter starts where "name=" follows.
// Forms (continuous, s in rad/s; frequencies in the spec in Hz):
//   gain:k=K
//   pid:kp=,ki=,kd=,tf=     kp + ki/s + kd s/(tf s + 1); ki in 1/s, kd in s, tf in s;
//                           omitted gains are 0; kd > 0 needs tf > 0 (else improper);
//                           setpoint=free: P and D act on the measurement only, the
//                           reference enters through ki/s (the loop gain is the same;
//                           the reference step is (ki/s) P / (1 + C P))
//   lead:z=HZ,p=HZ[,k=K]    k (s/wz + 1)/(s/wp + 1) (lag: the same with p < z)
//   lag:z=HZ,p=HZ[,k=K]
//   notch:f=HZ,width=HZ,depth=DB   (s^2 + 2 zz w s + w^2)/(s^2 + 2 zp w s + w^2),
//                           zp = width/(2 f) (width between the -3 dB points of
//                           the pole pair), zz = zp 10^(-depth/20)
//   poly:num=...;den=...    descending powers of s
//   roots:zeros=...;poles=...;k=K   rad/s; complex roots as a+bj, conjugates added
// A trailing @dt=T makes the product discrete by Tustin (with prewarp=HZ
// optionally); delay=SECONDS (computation delay) applies to either.
#pragma once

#include <string>

#include "fit/model.h"

namespace benchid::loop {

struct Controller {
  fit::RationalModel model;  // s domain, or z after @dt=
  std::string spec;
  // Setpoint-free PID: the reference path is ki/s (times the other factors of a
  // product) instead of the controller itself; empty = the controller.
  bool setpoint_free = false;
  fit::RationalModel reference_path;  // used when setpoint_free
};

// Throws InputError naming the form or parameter and what was expected.
Controller parse_controller(const std::string& spec);

// A controller argument: a name ending in ".json" is read as
// {"format": "benchid.controller/1", "spec": "FORM:PARAMS..."} and its spec
// (checked) returned; anything else is returned as it is. Throws InputError
// naming the file.
std::string controller_spec(const std::string& arg);

}  // namespace benchid::loop
