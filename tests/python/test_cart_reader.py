"""The cart's reader of Plan bytes (veer_plan_load_pb, src/wire_cart.c: no
decoded veer_v1_Plan) on plans of the shipped scenarios and on the same plans
re-encoded by Debian's python3-protobuf (an independent encoder): each loads,
and samples bit for bit like the heap decoder's plan (veer_plan_decode_pb,
which decodes the whole message with nanopb)."""

import ctypes

import pytest

import conftest
import scenarios

CASES = [(p.stem, conftest.load_scenario(p)) for p in conftest.shipped_scenarios()]
CASES += [(n, scenarios.get(n)) for n in ("icr_near_module", "pivot")]


def _samples(veer, lib, handle, duration):
    out = []
    for k in range(401):
        s = veer._lib.out_struct(veer._lib.Sample)
        assert lib.veer_plan_sample(handle, duration * k / 400.0, ctypes.byref(s)) == 0
        out.append(bytes(s))
    return out


def _cart(veer, lib, data):
    size = lib.veer_plan_workspace_size()
    work = (ctypes.c_double * ((size + 7) // 8))()
    handle = ctypes.c_void_p()
    diag = veer._lib.out_struct(veer._lib.Diag)
    st = lib.veer_plan_load_pb(data, len(data), work, size, ctypes.byref(handle), ctypes.byref(diag))
    return st, handle, work, diag


@pytest.mark.parametrize("name,request_", CASES, ids=[c[0] for c in CASES])
def test_cart_reader_matches_the_decoder(veer, name, request_):
    from veer import _pb

    lib = veer.library()
    data = veer.plan(request_).to_bytes()
    again = _pb.message("Plan").FromString(data).SerializeToString()
    for what, b in (("libveer", data), ("python3-protobuf", again)):
        st, handle, work, diag = _cart(veer, lib, b)
        assert st == 0, "%s: %s bytes refused: %s" % (name, what, diag.message)
        heap = ctypes.c_void_p()
        d2 = veer._lib.out_struct(veer._lib.Diag)
        assert lib.veer_plan_decode_pb(b, len(b), ctypes.byref(heap), ctypes.byref(d2)) == 0
        try:
            T = lib.veer_plan_duration(handle)
            assert T == lib.veer_plan_duration(heap) and T > 0.0
            assert _samples(veer, lib, handle, T) == _samples(veer, lib, heap, T), "%s: %s" % (name, what)
        finally:
            lib.veer_plan_destroy(heap)
        # the content hash covers what the bytes say: a changed duration is refused by both
        msg = _pb.message("Plan").FromString(b)
        msg.duration += 1e-3
        bad = msg.SerializeToString()
        assert _cart(veer, lib, bad)[0] != 0
        assert lib.veer_plan_decode_pb(bad, len(bad), ctypes.byref(heap), ctypes.byref(d2)) != 0
