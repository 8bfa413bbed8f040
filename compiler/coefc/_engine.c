/* Placeholder for the compiled bit-true engine core (issue 3). */
#define PY_SSIZE_T_CLEAN
#include <Python.h>

static struct PyModuleDef engine_module = {PyModuleDef_HEAD_INIT, "_engine", NULL, -1, NULL};

PyMODINIT_FUNC PyInit__engine(void) { return PyModule_Create(&engine_module); }
