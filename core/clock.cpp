// Clock implementations.
#include "core/clock.h"

#include <thread>

namespace ampbench {

RealClock::RealClock() : start_(std::chrono::steady_clock::now()) {}

double RealClock::now_s() const {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
}

void RealClock::sleep_s(double seconds) {
    if (seconds > 0) std::this_thread::sleep_for(std::chrono::duration<double>(seconds));
}

ScaledClock::ScaledClock(double scale) : scale_(scale > 0 ? scale : 1.0) {}

double ScaledClock::now_s() const { return wall_.now_s() * scale_; }

void ScaledClock::sleep_s(double seconds) { wall_.sleep_s(seconds / scale_); }

}  // namespace ampbench
