// The review half of the desktop application in one include: each view is a
// QWidget with a (QWidget* parent = nullptr) constructor and
// set_store(store::SqliteStore*), so the main window adds each in one line.
#pragma once

#include "ui/review/method_editor_view.hpp"
#include "ui/review/results_view.hpp"
#include "ui/review/supplies_view.hpp"
