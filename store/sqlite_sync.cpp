// SqliteArchive's side of sync: listing sessions, finding one by UUID, and writing sessions and
// lots read from another archive, each in one IMMEDIATE transaction, UUIDs kept and ids mapped.
#include <cmath>
#include <unordered_map>

#include "store/sqlite_archive.h"
#include "store/sqlite_archive_impl.h"
#include "store/sync_rules.h"

namespace ampbench::store {

namespace {

// Source point id -> its UUID, for mapping superseded_by.
std::unordered_map<std::int64_t, std::string> uuid_by_id(const std::vector<Point>& points) {
    std::unordered_map<std::int64_t, std::string> out;
    for (const auto& p : points) out[p.id] = p.uuid;
    return out;
}

}  // namespace

std::vector<Session> SqliteArchive::sessions() {
    return impl_->guarded([&] {
        std::vector<Session> out;
        auto& st = impl_->query(std::string("SELECT ") + session_columns +
                                " FROM sessions s JOIN boards b ON b.id = s.board_id ORDER BY s.id");
        while (st.executeStep()) out.push_back(read_session(st));
        return out;
    });
}

std::optional<Session> SqliteArchive::session_by_uuid(const std::string& uuid) {
    return impl_->guarded([&]() -> std::optional<Session> {
        auto& st = impl_->query(std::string("SELECT ") + session_columns +
                                " FROM sessions s JOIN boards b ON b.id = s.board_id "
                                "WHERE s.uuid = ?");
        st.bind(1, uuid);
        if (!st.executeStep()) return std::nullopt;
        return read_session(st);
    });
}

CopyCounts SqliteArchive::copy_session(const SessionDetail& detail) {
    const Session& s = detail.session;
    const std::string& path = impl_->path;
    if (s.uuid.empty())
        throw StoreError(fmt::format("archive {}: a session to copy needs its UUID", path));
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        CopyCounts added;
        const auto board = impl_->find_board(s.board_serial);
        if (!board)
            throw StoreError(fmt::format(
                "archive {}: board {} of session {} is not stored here; copy the board first",
                path, s.board_serial, s.uuid));

        std::int64_t id = 0;
        auto& find = impl_->query("SELECT id, status, finished_utc FROM sessions WHERE uuid = ?");
        find.bind(1, s.uuid);
        if (find.executeStep()) {
            id = find.getColumn(0).getInt64();
            const SessionStatus here = session_status_from(text(find.getColumn(1)));
            const std::string here_finished = text(find.getColumn(2));
            find.reset();
            if (session_status_is_newer(s, here, here_finished)) {
                auto& st = impl_->query(
                    "UPDATE sessions SET status = ?, finished_utc = ?, host = ?, pid = ?, "
                    "heartbeat_unix_s = ? WHERE id = ?");
                st.bind(1, to_string(s.status));
                bind_text_or_null(st, 2, s.finished_utc);
                st.bind(3, s.host);
                st.bind(4, s.pid);
                st.bind(5, s.heartbeat_unix_s);
                st.bind(6, id);
                st.exec();
            }
        } else {
            find.reset();
            auto& st = impl_->query(
                "INSERT INTO sessions(uuid, board_id, kind, status, started_utc, finished_utc, "
                "operator, host, pid, heartbeat_unix_s, bench_file, software_version, notes) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
            st.bind(1, s.uuid);
            st.bind(2, board->id);
            st.bind(3, to_string(s.kind));
            st.bind(4, to_string(s.status));
            st.bind(5, s.started_utc);
            bind_text_or_null(st, 6, s.finished_utc);
            st.bind(7, s.operator_name);
            st.bind(8, s.host);
            st.bind(9, s.pid);
            st.bind(10, s.heartbeat_unix_s);
            st.bind(11, s.bench_file);
            st.bind(12, s.software_version);
            st.bind(13, s.notes);
            st.exec();
            id = impl_->db->getLastInsertRowid();
            added.sessions = 1;
            // Instruments and probes are written once, when the session begins.
            impl_->insert_instruments(id, detail.instruments);
            impl_->insert_probes(id, detail.probes);
            added.instruments = static_cast<std::int64_t>(detail.instruments.size());
            added.probes = static_cast<std::int64_t>(detail.probes.size());
        }

        const std::string now = utc_iso(impl_->now());
        for (const auto& p : detail.plan) {
            auto& st = impl_->query(
                "INSERT INTO plan_points(session_id, plan_index, freq_hz, adaptive, created_utc) "
                "VALUES (?, ?, ?, ?, ?) ON CONFLICT(session_id, plan_index) DO NOTHING");
            st.bind(1, id);
            st.bind(2, p.index);
            st.bind(3, p.freq_hz);
            st.bind(4, p.adaptive ? 1 : 0);
            st.bind(5, now);
            added.plan_points += st.exec();
        }

        // Readings here, by UUID: their ids and what supersedes them.
        struct Here {
            std::int64_t id;
            std::optional<std::int64_t> superseded_by;
        };
        std::unordered_map<std::string, Here> here;
        {
            auto& st = impl_->query(
                "SELECT uuid, id, superseded_by FROM points WHERE session_id = ?");
            st.bind(1, id);
            while (st.executeStep())
                here[text(st.getColumn(0))] = {st.getColumn(1).getInt64(),
                                               optional_int(st.getColumn(2))};
        }
        // The missing readings get their ids now (in order of taking), so superseded_by can
        // name a reading inserted later in this transaction (that foreign key is deferred).
        std::unordered_map<std::string, std::int64_t> dest_id;
        for (const auto& [uuid, h] : here) dest_id[uuid] = h.id;
        std::int64_t next_id = impl_->db->execAndGet("SELECT coalesce(max(id), 0) + 1 FROM points")
                                   .getInt64();
        std::vector<const Point*> missing;
        for (const auto& p : detail.points) {
            if (p.uuid.empty())
                throw StoreError(fmt::format("archive {}: a reading of session {} has no UUID",
                                             path, s.uuid));
            if (dest_id.count(p.uuid)) continue;
            if (!std::isfinite(p.freq_hz) || !std::isfinite(p.gain_db))
                throw StoreError(fmt::format(
                    "archive {}: reading {} of session {} has a non-finite freq_hz or gain_db",
                    path, p.uuid, s.uuid));
            dest_id[p.uuid] = next_id++;
            missing.push_back(&p);
        }
        const auto source_uuid = uuid_by_id(detail.points);
        auto mapped_superseded_by = [&](const Point& p) -> std::optional<std::int64_t> {
            if (!p.superseded_by) return std::nullopt;
            const auto u = source_uuid.find(*p.superseded_by);
            if (u == source_uuid.end())
                throw StoreError(fmt::format(
                    "archive {}: reading {} of session {} is superseded by a reading not in the "
                    "copy",
                    path, p.uuid, s.uuid));
            return dest_id.at(u->second);
        };
        // Readings already here that have been retaken since: marked first, so the partial
        // unique index (one current reading per planned point) holds at every insert.
        for (const auto& p : detail.points) {
            const auto h = here.find(p.uuid);
            if (h == here.end()) continue;
            const auto by = mapped_superseded_by(p);
            if (!by || h->second.superseded_by == by) continue;
            auto& st = impl_->query("UPDATE points SET superseded_by = ? WHERE id = ?");
            st.bind(1, *by);
            st.bind(2, h->second.id);
            st.exec();
        }
        for (const Point* p : missing) {
            // The sequence is kept: a session is written by one station at a time, so the
            // readings here are a prefix of the ones being copied.
            auto& st = impl_->query(
                "INSERT INTO points(id, uuid, session_id, sequence, plan_index, freq_hz, "
                "in_amplitude_v, in_amplitude_sd_v, in_phase_deg, in_phase_sd_deg, "
                "out_amplitude_v, out_amplitude_sd_v, out_phase_deg, out_phase_sd_deg, gain_db, "
                "gain_db_sd, phase_deg, phase_deg_sd, thd_pct, flags, settings_json, taken_utc, "
                "superseded_by) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
            st.bind(1, dest_id.at(p->uuid));
            st.bind(2, p->uuid);
            st.bind(3, id);
            st.bind(4, p->sequence);
            bind_point_measurement(st, 5, *p);
            bind_optional(st, 23, mapped_superseded_by(*p));
            st.exec();
            ++added.points;
        }

        for (const auto& f : detail.fits) {
            if (f.uuid.empty())
                throw StoreError(fmt::format("archive {}: a fit of session {} has no UUID", path,
                                             s.uuid));
            auto& known = impl_->query("SELECT 1 FROM fits WHERE uuid = ?");
            known.bind(1, f.uuid);
            if (known.executeStep()) continue;
            FitRecord copy = f;
            copy.session_id = id;
            impl_->insert_fit(copy);
            ++added.fits;
        }
        txn.commit();
        return added;
    });
}

CopyCounts SqliteArchive::copy_lot(const Lot& lot, const std::string& session_uuid,
                                   const std::vector<Device>& devices) {
    const std::string& path = impl_->path;
    if (lot.uuid.empty())
        throw StoreError(fmt::format("archive {}: lot {} to copy has no UUID", path, lot.lot_code));
    return impl_->guarded([&] {
        auto txn = impl_->write_transaction();
        CopyCounts added;
        std::optional<std::int64_t> session_id;
        if (!session_uuid.empty()) {
            auto& st = impl_->query("SELECT id FROM sessions WHERE uuid = ?");
            st.bind(1, session_uuid);
            if (!st.executeStep())
                throw StoreError(fmt::format(
                    "archive {}: session {} of lot {} is not stored here; copy it first", path,
                    session_uuid, lot.lot_code));
            session_id = st.getColumn(0).getInt64();
        }

        std::int64_t lot_id = 0;
        auto& find = impl_->query("SELECT id, status, session_id FROM lots WHERE uuid = ?");
        find.bind(1, lot.uuid);
        if (find.executeStep()) {
            lot_id = find.getColumn(0).getInt64();
            const std::string status = text(find.getColumn(1));
            const bool has_session = !find.getColumn(2).isNull();
            find.reset();
            if (lot_status_is_newer(lot.status, status)) {
                auto& st = impl_->query("UPDATE lots SET status = ? WHERE id = ?");
                st.bind(1, lot.status);
                st.bind(2, lot_id);
                st.exec();
            }
            if (!has_session && session_id) {
                auto& st = impl_->query("UPDATE lots SET session_id = ? WHERE id = ?");
                st.bind(1, *session_id);
                st.bind(2, lot_id);
                st.exec();
            }
        } else {
            find.reset();
            auto& clash = impl_->query("SELECT uuid FROM lots WHERE lot_code = ?");
            clash.bind(1, lot.lot_code);
            if (clash.executeStep())
                throw StoreError(fmt::format(
                    "archive {}: lot code {} is already used here by another lot ({})", path,
                    lot.lot_code, text(clash.getColumn(0))));
            Lot copy = lot;
            copy.session_id = session_id;
            lot_id = impl_->insert_lot(copy);
            added.lots = 1;
        }

        std::unordered_map<std::string, std::int64_t> dest_id;
        {
            auto& st = impl_->query("SELECT uuid, id FROM devices WHERE lot_id = ?");
            st.bind(1, lot_id);
            while (st.executeStep()) dest_id[text(st.getColumn(0))] = st.getColumn(1).getInt64();
        }
        std::unordered_map<std::int64_t, std::string> source_uuid;
        for (const auto& d : devices) source_uuid[d.id] = d.uuid;
        std::vector<const Device*> inserted;
        for (const auto& d : devices) {
            if (d.uuid.empty())
                throw StoreError(fmt::format("archive {}: a device of lot {} has no UUID", path,
                                             lot.lot_code));
            if (dest_id.count(d.uuid)) continue;
            auto& st = impl_->query(
                "INSERT INTO devices(uuid, lot_id, device_index, readings_json, hfe, hfe_sd, "
                "vbe_v, vbe_sd_v, ic_a, ic_sd_a, vce_v, vce_sd_v, passed, skipped_reason) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
            st.bind(1, d.uuid);
            st.bind(2, lot_id);
            bind_device_readings(st, 3, d);
            st.exec();
            dest_id[d.uuid] = impl_->db->getLastInsertRowid();
            inserted.push_back(&d);
            ++added.devices;
        }
        // replacement_of once every device of the copy is here (it is not a deferred key).
        for (const Device* d : inserted) {
            if (!d->replacement_of) continue;
            const auto u = source_uuid.find(*d->replacement_of);
            if (u == source_uuid.end())
                throw StoreError(fmt::format(
                    "archive {}: device {} of lot {} replaces a device not in the copy", path,
                    d->uuid, lot.lot_code));
            auto& st = impl_->query("UPDATE devices SET replacement_of = ? WHERE id = ?");
            st.bind(1, dest_id.at(u->second));
            st.bind(2, dest_id.at(d->uuid));
            st.exec();
        }
        txn.commit();
        return added;
    });
}

}  // namespace ampbench::store
