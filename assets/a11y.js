/*
 * Keyboard and screen-reader repairs for Dash's own components, and the Fit/Stop shortcuts.
 *
 * Dash 4.4's dcc components emit markup that traps the keyboard or misleads a
 * screen reader (axe-core 4.x, WCAG 2.1 A/AA):
 *
 * - Dropdown: a hidden "focus target" input (tabindex 0, aria-hidden) hands
 *   focus to the real button (tabindex -1); Tab from the button lands on the
 *   hidden input again, so Tab alternates between the two for ever (a
 *   keyboard trap, WCAG 2.1.2). Here the button takes the Tab stop and the
 *   hidden input leaves the Tab order. The button's accessible name comes
 *   from its value alone (aria-labelledby); the field's <label for=id> is
 *   put in front, so "Region: Tamsey" is read, not just "Tamsey".
 * - RadioItems / Checklist: a role=listbox whose role=option labels each
 *   hold a native radio or checkbox (an interactive element inside another,
 *   and a listbox with no name). The native inputs already work with the
 *   keyboard (arrows move within a radio group), so the container becomes a
 *   radiogroup (or group) named by its fieldset's legend or its <label
 *   for=id>, and the labels lose the option role.
 * - Upload: the file input has no name; it takes the one of <label for=id>
 *   of its Upload.
 * - DataTable: the paging buttons hold only an icon; they get names.
 * - Links styled as buttons (Briefing view, exports) shown disabled leave
 *   the Tab order and say aria-disabled.
 *
 * The repairs run on every DOM change (React re-renders may put the
 * attributes back), and set an attribute only when its value differs, so
 * they never loop.
 *
 * Shortcuts: Alt+Shift+F presses Fit and Alt+Shift+S presses Stop (their
 * titles say so). A file, not an inline script: the server's
 * Content-Security-Policy serves scripts from 'self'.
 */
(function () {
    "use strict";

    function setAttr(el, name, value) {
        if (value === null) {
            if (el.hasAttribute(name)) { el.removeAttribute(name); }
        } else if (el.getAttribute(name) !== value) {
            el.setAttribute(name, value);
        }
    }

    function labelIdFor(id) {
        // the <label for=id> of a control, given an id if it has none
        if (!id) { return null; }
        var label = document.querySelector('label[for="' + CSS.escape(id) + '"]');
        if (!label) { return null; }
        if (!label.id) { label.id = id + "--label"; }
        return label.id;
    }

    function fixDropdown(button) {
        var dummy = button.previousElementSibling;
        if (dummy && dummy.classList.contains("dash-dropdown-focus-target")) {
            setAttr(dummy, "tabindex", "-1");
        }
        setAttr(button, "tabindex", button.disabled ? "-1" : "0");
        var labelId = labelIdFor(button.id);
        var named = button.getAttribute("aria-labelledby") || "";
        if (labelId && named.split(" ").indexOf(labelId) !== 0) {
            setAttr(button, "aria-labelledby", (labelId + " " + named.split(" ").filter(function (t) {
                return t && t !== labelId;
            }).join(" ")).trim());
        }
        // the list it opens is a group of radio buttons, not a listbox (see fixOptionsList)
        setAttr(button, "aria-haspopup", "dialog");
    }

    function fixOptionsList(list) {
        var radio = list.querySelector('input[type="radio"]') !== null || list.classList.contains("dash-radioitems");
        setAttr(list, "role", radio ? "radiogroup" : "group");
        var name = null;
        var fieldset = list.closest("fieldset");
        var legend = fieldset ? fieldset.querySelector("legend") : null;
        if (legend) {
            if (!legend.id) { legend.id = (list.id || "options") + "--legend"; }
            name = legend.id;
        } else {
            name = labelIdFor(list.id);
        }
        if (name) { setAttr(list, "aria-labelledby", name); }
        list.querySelectorAll(".dash-options-list-option").forEach(function (opt) {
            setAttr(opt, "role", null);
            setAttr(opt, "aria-selected", null);
        });
    }

    function fixUpload(input) {
        var upload = input.closest("[id]");
        var labelId = upload ? labelIdFor(upload.id) : null;
        if (labelId) { setAttr(input, "aria-labelledby", labelId); }
    }

    var PAGING = {"first-page": "First page", "previous-page": "Previous page", "next-page": "Next page",
                  "last-page": "Last page"};

    function fixPaging(button) {
        Object.keys(PAGING).forEach(function (cls) {
            if (button.classList.contains(cls)) { setAttr(button, "aria-label", PAGING[cls]); }
        });
    }

    function fixLinkButton(a) {
        // a link styled as a button and shown disabled (no run yet) is no Tab stop and says it is disabled
        var off = a.classList.contains("disabled");
        setAttr(a, "aria-disabled", off ? "true" : null);
        setAttr(a, "tabindex", off ? "-1" : null);
    }

    // Focus that would be lost: a change date's field or Remove button is replaced when the list is
    // redrawn (a date typed, a row removed), and focus would fall back to the page's start (WCAG 2.4.3).
    // It goes to the control with the same id if it is back, else (a row was removed) to "Add change date".
    var lastInList = null, rowsAtFocus = 0;
    function rows() { return document.querySelectorAll("#change-date-list .change-row").length; }
    document.addEventListener("focusin", function (e) {
        var t = e.target;
        lastInList = t && t.closest && t.closest("#change-date-list") ? t : null;
        rowsAtFocus = rows();
    });

    function keepFocus() {
        var lost = lastInList;
        if (!lost || lost.isConnected) { return; }
        var active = document.activeElement;
        if (active && active !== document.body) { lastInList = null; return; }
        var removed = rows() < rowsAtFocus;  // a row went: its neighbour's controls now have its ids
        var again = !removed && lost.id ? document.getElementById(lost.id) : null;
        var target = again || document.getElementById("add-change-date");
        if (target) { target.focus(); }
        lastInList = target && target.closest("#change-date-list") ? target : null;
        rowsAtFocus = rows();
    }

    function repair() {
        keepFocus();
        document.querySelectorAll("a.link-btn").forEach(fixLinkButton);
        document.querySelectorAll("button.dash-dropdown").forEach(fixDropdown);
        document.querySelectorAll(".dash-options-list").forEach(fixOptionsList);
        document.querySelectorAll('input[type="file"]').forEach(fixUpload);
        document.querySelectorAll(".previous-next-container button").forEach(fixPaging);
    }

    var scheduled = false;
    function schedule() {
        // once per burst of DOM changes, before the browser paints or runs another task
        if (scheduled) { return; }
        scheduled = true;
        Promise.resolve().then(function () { scheduled = false; repair(); });
    }

    function start() {
        repair();
        new MutationObserver(schedule).observe(document.body, {
            childList: true, subtree: true, attributes: true,
            attributeFilter: ["tabindex", "role", "aria-selected", "aria-labelledby", "disabled", "class"],
        });
    }

    // ------------------------------------------------------------ shortcuts
    var SHORTCUTS = {KeyF: "fit-button", KeyS: "stop-button"};

    document.addEventListener("keydown", function (e) {
        if (!e.altKey || !e.shiftKey || e.ctrlKey || e.metaKey) { return; }
        var id = SHORTCUTS[e.code];
        var button = id ? document.getElementById(id) : null;
        if (!button) { return; }
        e.preventDefault();
        if (!button.disabled) {
            // a value typed into a field is sent on blur (debounced inputs): leave the field first
            if (document.activeElement && document.activeElement !== document.body) {
                document.activeElement.blur();
            }
            button.focus();
            button.click();
        }
    });

    if (document.readyState === "loading") {
        document.addEventListener("DOMContentLoaded", start);
    } else {
        start();
    }
})();
