// Shared by the store and CLI sync tests (header-only, so both suites can include it): an
// archive's rows per table and every UUID in it, read through the Archive interface so the same
// check runs on any backend. (A fresh PostgreSQL database per test comes from
// tests/support/test_backend.h.)
#pragma once

#include <algorithm>
#include <set>
#include <string>
#include <vector>

#include "store/archive.h"

namespace ampbench::store::testing {

struct ArchiveRows {
    std::int64_t designs = 0, boards = 0;
    CopyCounts rows;
    std::int64_t uuid_rows = 0;   // UUIDs seen (sessions, points, fits, lots, devices)
    std::set<std::string> uuids;  // the distinct ones: uuids.size() == uuid_rows, no duplicate

    // "designs=1 boards=2 sessions=3 ..." for messages and comparisons.
    std::string text() const {
        const CopyCounts& r = rows;
        return "designs=" + std::to_string(designs) + " boards=" + std::to_string(boards) +
               " sessions=" + std::to_string(r.sessions) +
               " instruments=" + std::to_string(r.instruments) +
               " probes=" + std::to_string(r.probes) +
               " plan_points=" + std::to_string(r.plan_points) +
               " points=" + std::to_string(r.points) + " fits=" + std::to_string(r.fits) +
               " lots=" + std::to_string(r.lots) + " devices=" + std::to_string(r.devices);
    }
};

inline ArchiveRows archive_rows(Archive& a) {
    ArchiveRows out;
    std::set<std::string> designs;
    for (const auto& b : a.boards()) {
        ++out.boards;
        if (!b.board.design_address.empty()) designs.insert(b.board.design_address);
    }
    out.designs = static_cast<std::int64_t>(designs.size());
    auto note = [&](const std::string& uuid) {
        ++out.uuid_rows;
        out.uuids.insert(uuid);
    };
    for (const auto& s : a.sessions()) {
        const SessionDetail d = a.session_detail(s.id);
        ++out.rows.sessions;
        note(s.uuid);
        out.rows.instruments += static_cast<std::int64_t>(d.instruments.size());
        out.rows.probes += static_cast<std::int64_t>(d.probes.size());
        out.rows.plan_points += static_cast<std::int64_t>(d.plan.size());
        for (const auto& p : d.points) {
            ++out.rows.points;
            note(p.uuid);
        }
        for (const auto& f : d.fits) {
            ++out.rows.fits;
            note(f.uuid);
        }
    }
    for (const auto& l : a.lots()) {
        ++out.rows.lots;
        note(l.uuid);
        for (const auto& d : a.devices(l.id)) {
            ++out.rows.devices;
            note(d.uuid);
        }
    }
    return out;
}

}  // namespace ampbench::store::testing
