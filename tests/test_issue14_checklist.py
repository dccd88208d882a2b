"""Issue 14's checklist: every case the issue names, and the test that shows it (one line, exit 2, or a
correct result). The test below fails when a listed test is renamed or removed, so the list cannot
silently go stale. Cases without a test are listed in ``MISSING`` with the reason.

Source: the text of issue 14 ("Hardening: no bad answer with exit 0, ..."), section by section.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

HERE = Path(__file__).resolve().parent

CHECKLIST: dict[str, list[str]] = {
    # 1. wrong answers that exit 0
    "pole between vertices (1/x, tan(20*x))": [
        "test_domain.py::test_poles_between_vertices_are_found",
        "test_domain.py::test_cli_refuses_a_pole_with_file_and_field",
    ],
    "bounded gradients on the surface (sqrt(x + 1), sqrt(x + 1.0000001), tan near its pole)": [
        "test_domain.py::test_near_singular_sqrt_is_found_where_the_closed_form_puts_it",
        "test_domain.py::test_singular_sqrt_has_no_finite_gradient",
        "test_domain.py::test_tan_just_inside_its_pole_is_steep",
        "test_domain.py::test_cli_refuses_a_steep_map_with_file_field_and_where",
        "test_domain.py::test_cli_refuses_a_steep_map_on_a_mesh_file",
    ],
    "constant map on a torus, x*x - x*x, f1 == f2": [
        "test_bad_inputs.py::test_degenerate_map_one_line_exit_2"
    ],
    "constant mesh fields": ["test_bad_inputs.py::test_constant_mesh_fields_one_line_exit_2"],
    "insist: caveat in every result and on the report cover": [
        "test_normality.py::test_insist_goes_on_with_the_caveat_in_every_result",
        "test_normality.py::test_report_first_note_is_the_caveat",
    ],
    "zero-area triangles (6 -> 8 contours), counted and handled": [
        "test_bad_inputs.py::test_zero_area_triangle_is_flipped_and_the_grid_is_that_of_the_surface",
        "test_bad_inputs.py::test_zero_area_triangle_counted_in_grid_meta_and_one_note",
        "test_mesh_hygiene.py::test_zero_area_triangle_no_flip_removes_is_one_line_exit_2",
    ],
    "1e308 in a grid file: finite tolerance, increasing contour refused": [
        "test_bad_inputs.py::test_bad_grid_file_one_line_exit_2",
        "test_cli_errors.py::test_grid_file_increasing_proper_contour",
    ],
    "report: special file without counts, {} as distance file": [
        "test_bad_inputs.py::test_bad_result_file_report_one_line_exit_2",
    ],
    "report: results written by another version": [
        "test_fingerprint.py::test_newer_format_version_is_refused",
        "test_fingerprint.py::test_unknown_format_version_values_are_refused",
    ],
    "report: files of different settings (map --pairs roles after a perturbation study)": [
        "test_fingerprint.py::test_map_with_other_pairs_after_a_perturbation_study_is_refused",
        "test_fingerprint.py::test_a_map_flag_override_is_named_and_one_command_fixes_it",
    ],
    "an audit that did not run is null and reads 'not run'": [
        "test_distance.py::test_shift_by_c_c_gives_c_on_slope_one",
    ],
    "'Stability violations: 0' without a tracked distance": [
        "test_bad_inputs.py::test_report_without_tracked_distance_claims_no_stability_check",
    ],
    # 2. tracebacks for user mistakes
    "--resolution 1 / 2 / 20000 against the file's limits": [
        "test_cli_errors.py::test_flags_obey_the_study_file_limits"
    ],
    "--runs 1000000000": ["test_cli_errors.py::test_runs_flag_obeys_the_study_file_limit"],
    "rank-deficient linear map, constant map, radii 1e300 on an ellipsoid": [
        "test_cli_errors.py::test_rank_deficient_linear_map",
        "test_cli_errors.py::test_constant_linear_map_on_an_ellipsoid",
        "test_cli_errors.py::test_bad_study_one_line_exit_2_nothing_written",
    ],
    "grid files: tolerance string/list, meta not an object, 400 digits, 1e5-deep arrays": [
        "test_bad_inputs.py::test_bad_grid_file_one_line_exit_2",
    ],
    "--out a file, under a file, read-only": [
        "test_cli_paths.py::test_out_is_existing_file",
        "test_cli_paths.py::test_out_under_a_file",
        "test_cli_paths.py::test_out_read_only_folder",
        "test_cli_paths.py::test_read_only_out_simulated",
    ],
    "unreadable study, mesh or grid file": [
        "test_cli_paths.py::test_study_unreadable",
        "test_cli_paths.py::test_unreadable_study_simulated",
        "test_mesh_inputs.py::test_unreadable_obj_names_obj_and_permission",
        "test_cli_paths.py::test_grid_file_unreadable_by_permissions",
        "test_cli_paths.py::test_grid_file_replaced_by_a_folder",
        "test_cli_paths.py::test_grid_file_unreadable_simulated",
    ],
    "report --out a folder (no .tmp left), existing file, under a file": [
        "test_cli_paths.py::test_report_out_is_a_folder_no_tmp_left",
        "test_cli_paths.py::test_report_out_existing_file_needs_force",
        "test_cli_paths.py::test_report_out_under_a_file",
    ],
    "special.json a list, a runs.jsonl line a list": [
        "test_bad_inputs.py::test_bad_result_file_report_one_line_exit_2"
    ],
    "a folder given as study": ["test_cli_paths.py::test_study_is_a_folder"],
    "radii 1e-300 and exact-route errors name file and field": [
        "test_cli_errors.py::test_bad_study_one_line_exit_2_nothing_written",
        "test_cli_errors.py::test_rank_deficient_exact_route_core_error_then_located",
    ],
    "binary PLY whose header lies about the vertex count": [
        "test_mesh_inputs.py::test_binary_ply_lying_vertex_count_is_not_polygons",
    ],
    "OBJ negative (relative) indices": ["test_mesh_inputs.py::test_obj_negative_indices_read_like_absolute"],
    "'#' in an expression": [
        "test_bad_inputs.py::test_hash_in_expression_is_rejected",
        "test_bad_inputs.py::test_hash_in_study_map_one_line_exit_2",
    ],
    "newlines in study.name": ["test_mesh_inputs.py::test_study_name_with_control_characters_refused"],
    "overflow: one counted warning line (main process and every kind of worker)": [
        "test_bad_inputs.py::test_float_warnings_become_one_counted_line",
        "test_bad_inputs.py::test_float_warnings_of_worker_processes_are_counted",
        "test_bad_inputs.py::test_float_warnings_of_distance_workers_are_counted",
        "test_bad_inputs.py::test_float_warnings_of_map_tiles_are_counted",
    ],
    # 3. size
    "special.geojson written streaming": [
        "test_io_stream.py::test_atlas_geojson_streamed_equals_whole",
        "test_io_stream.py::test_interrupted_stream_leaves_no_file",
    ],
    "estimate and refusal before an N^4 stage": [
        "test_cli_errors.py::test_map_over_the_memory_budget_is_refused_before_mapping",
        "test_tiles.py::test_memory_sizes",
    ],
    # 4. processes and files
    "SIGTERM handled like SIGINT": [
        "test_signals.py::test_sigterm_during_a_map_is_a_clean_exit",
        "test_signals.py::test_sigterm_during_perturb_ends_the_workers_and_the_run_set_resumes",
    ],
    "--jobs above the core count": [
        "test_bad_inputs.py::test_jobs_above_the_core_count_is_capped_with_one_note"
    ],
    "result files honour the umask": [
        "test_bad_inputs.py::test_result_files_honour_umask",
        "test_io_stream.py::test_streamed_file_mode_honours_umask",
    ],
    "corrupt middle line of runs.jsonl rewritten away": [
        "test_perturb.py::test_corrupt_middle_line_is_dropped_and_its_run_recomputed_once",
    ],
    "distance --jobs 1 and 2: same search metadata": [
        "test_fingerprint.py::test_jobs_do_not_change_the_search"
    ],
    "progress for long silent stages (a 2M-face mesh's grid)": [
        "test_stage_progress.py::test_large_mesh_and_grid_print_each_step",
        "test_stage_progress.py::test_small_inputs_stay_quiet",
    ],
}

MISSING: dict[str, str] = {
    "the README's memory figures measured and corrected": (
        "a benchmark, not a test: tests/benchmarks/bench_map_cli.py (results_map_cli.md; README "
        "'specmap map end to end': the CLI peaks at 1.01-1.06x the atlas at 20-40 contours, 3.98 GB at 40) "
        "and bench_special.py for the atlas column"
    ),
}


def _test_names(file: str) -> set[str]:
    tree = ast.parse((HERE / file).read_text())
    return {n.name for n in tree.body if isinstance(n, ast.FunctionDef) and n.name.startswith("test_")}


@pytest.mark.parametrize("case", sorted(CHECKLIST))
def test_every_case_of_issue_14_has_its_test(case: str) -> None:
    for ref in CHECKLIST[case]:
        file, name = ref.split("::")
        assert name in _test_names(file), f"{case}: {ref} is gone; point the checklist at its new test"
