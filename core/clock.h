// Time as procedures see it: real (steady clock), virtual (waits advance at once), or scaled
// (a served virtual bench where virtual time follows wall time times a factor).
#pragma once

#include <chrono>
#include <memory>

namespace ampbench {

class Clock {
public:
    virtual ~Clock() = default;
    // Seconds since an arbitrary epoch fixed when the clock was made.
    virtual double now_s() const = 0;
    // Waits `seconds` of this clock's time.
    virtual void sleep_s(double seconds) = 0;
    // True when waits cost no wall time (the in-process virtual bench).
    virtual bool is_virtual() const { return false; }
};

class RealClock final : public Clock {
public:
    RealClock();
    double now_s() const override;
    void sleep_s(double seconds) override;

private:
    std::chrono::steady_clock::time_point start_;
};

// Virtual time: sleep_s advances the clock instantly; advance_s lets simulated instruments
// charge their latency.
class VirtualClock final : public Clock {
public:
    double now_s() const override { return now_; }
    void sleep_s(double seconds) override {
        if (seconds > 0) now_ += seconds;
    }
    void advance_s(double seconds) { sleep_s(seconds); }
    bool is_virtual() const override { return true; }

private:
    double now_ = 0.0;
};

// Virtual time = wall time × scale, for a virtual bench served over TCP or a pseudo-terminal.
class ScaledClock final : public Clock {
public:
    explicit ScaledClock(double scale);
    double now_s() const override;
    void sleep_s(double seconds) override;
    double scale() const { return scale_; }

private:
    RealClock wall_;
    double scale_;
};

}  // namespace ampbench
